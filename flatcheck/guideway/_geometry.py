"""Geometry of a guideway body: faces fitted to their ties, parallelism, squareness, twist, rails.

Each face's survey gives its *form* only (an autocollimator or a level sees no offset, and a survey is
reduced about its own least-squares plane). Where the face sits in the body - its offset and its two tilts,
the plane ``w = a + b x + c s`` (outward height in µm, ``x`` along the travel and ``s`` across, mm) - comes
from the ties: thickness between opposed faces, heights between faces facing the same way, squareness
between perpendicular faces and twist runs. The planes are fitted to the ties by weighted least squares
(weights ``1/u²`` from each tie's standard uncertainty), and each face's outward height is then
``w(x, s) = form(x, s) + a + b x + c s``.

Datum system and free parameters
--------------------------------
The body frame is fixed by the *primary datum* (the face named ``datum`` in the body file, else the first
face): its plane is ``a = b = c = 0``. The first face on the other axis is the *secondary datum*: its offset
and its tilt along the travel are 0 (they only place the frame), its tilt across stays unknown (that is its
squareness to the primary). (ISO 5459 datum systems: primary and secondary datum, from memory.) Every other
plane parameter is determined by the ties or it is *free*: a parameter is determined when its unit vector
lies in the row space of the tie equations (tested on the null space of the column-scaled design matrix
from an SVD). A free parameter is held at its nominal value 0 and reported as free; a figure that needs it
is not stated (``nan``).

Figures (ISO 1101 tolerance zones; the datum as the associated minimum-zone plane of the datum face,
ISO 5459, from memory)
-------------------------------------------------------------------------------------------------------------
- flatness of each face: minimum zone of its stations (ISO 12781-1 MZPL);
- straightness along the travel: minimum zone (ISO 12780-1 MZLI) of the face's centre line;
- parallelism of face A to datum B: the width of the zone of two planes parallel to B's minimum-zone plane
  that contains every station of A. For opposed faces the distance from B's datum plane, along the axis,
  is ``wA + DB`` (outward heights point opposite ways), for faces facing the same way ``wA - DB``. When the
  ties fix the relative tilt along the travel but not across (every tie on one line), the line element of A
  at the ties' across position is toleranced instead (ISO 1101 parallelism of a line to a datum plane) and
  the zone says so;
- squareness of A to B: the angle ``90° - angle(outward normals)`` of the faces' least-squares planes
  (positive when an outside corner is open), and the ISO 1101 perpendicularity zone of A: two parallel planes
  perpendicular to B's minimum-zone plane (free to turn about B's normal) enclosing A;
- twist (winding): the across slope ``θ(x)`` of a face along the travel (least-squares slope of the
  cross-section at each station), from its survey or from twist runs; stated as its peak-to-valley over the
  travel and the largest peak-to-valley within any 1000 mm of travel ("per metre", in the manner of the local
  tolerances of ISO 230-1, from memory);
- two rails (faces facing the same way at different across positions): the height difference
  ``wB(x, sB) - wA(x, sA)`` along the travel and the twist between them, ``(wB - wA)/(sB - sA)``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import GeometryError
from ..units import URAD_TO_ARCSEC
from ._body import Face, GuidewayBody

__all__ = [
    "TWIST_WINDOW_MM",
    "OUTLIER_RATIO",
    "FacePlane",
    "FaceGeometry",
    "TieResidual",
    "Parallelism",
    "Squareness",
    "Twist",
    "RailPair",
    "BodyGeometry",
    "evaluate_body",
    "window_ptp",
]

#: Window of the "per metre" twist: 1000 mm of travel (ISO 230-1 states local tolerances per 1000 mm; from memory).
TWIST_WINDOW_MM = 1000.0
#: A tie residual above this many standard uncertainties is flagged (a convention of this tool: 3 sigma).
OUTLIER_RATIO = 3.0
#: Relative singular-value threshold below which a direction of the tie equations counts as undetermined.
_RANK_RTOL = 1e-9
#: Stations across a face at which the cross-section's slope is fitted.
_ACROSS_SAMPLES = 11
_PARAM_NAMES = ("offset", "tilt along", "tilt across")


# --------------------------------------------------------------------------- results
@dataclass(frozen=True)
class FacePlane:
    """Where a face sits in the body: its least-squares plane ``w = a + b x + c s`` (outward, µm).

    Attributes
    ----------
    offset_um : float
        ``a``: outward height at x = 0, s = 0 relative to nominal, µm.
    tilt_x_urad : float
        ``b``: slope of the outward height along the travel, µrad (µm/m).
    tilt_across_urad : float
        ``c``: slope of the outward height along +s, µrad.
    free : tuple of str
        Parameters no tie fixes (held at 0): some of ``"offset"``, ``"tilt along"``, ``"tilt across"``.
    datum : str
        ``"primary"``, ``"secondary"`` or ``""``: the parameters a datum fixes by definition are not free.
    """

    offset_um: float
    tilt_x_urad: float
    tilt_across_urad: float
    free: tuple = ()
    datum: str = ""


@dataclass(frozen=True, eq=False)
class FaceGeometry:
    """Everything stated about one face.

    Attributes
    ----------
    name, normal, survey : str
    n_points : int
        Stations (or height-map points) of the face.
    flatness_um : float
        Minimum-zone flatness, µm (``nan`` for a face surveyed on one line only).
    straightness_um : float
        Minimum-zone straightness of the face's centre line along the travel, µm.
    plane : FacePlane
        The face's place in the body.
    across_x_mm, across_slope_urad : ndarray, shape (k,)
        Across slope of the face's form along the travel (empty for a face surveyed on one line).
    x_range_mm : (float, float)
        Surveyed extent along the travel, mm.
    """

    name: str
    normal: str
    survey: str
    n_points: int
    flatness_um: float
    straightness_um: float
    plane: FacePlane
    across_x_mm: np.ndarray
    across_slope_urad: np.ndarray
    x_range_mm: tuple


@dataclass(frozen=True)
class TieResidual:
    """One tie reading against the fitted body.

    Attributes
    ----------
    kind : {"thickness", "height", "squareness", "twist"}
    faces : tuple of str
    label : str
        Where the reading is in the body file.
    x_mm : float
    measured, fitted, residual : float
        In ``unit``; ``residual = measured - fitted`` (for a twist run, after its fitted zero).
    u : float
        Standard uncertainty of the reading, in ``unit``.
    unit : {"um", "urad"}
    """

    kind: str
    faces: tuple
    label: str
    x_mm: float
    measured: float
    fitted: float
    residual: float
    u: float
    unit: str

    @property
    def normalized(self) -> float:
        """Residual over its standard uncertainty."""
        return self.residual / self.u


@dataclass(frozen=True)
class Parallelism:
    """Parallelism of a face to its datum face (ISO 1101).

    Attributes
    ----------
    faces : (str, str)
        ``(toleranced face, datum face)``.
    value_um : float
        Width of the tolerance zone, µm (``nan`` when the ties leave the faces' relative tilt free).
    zone : {"plane", "line", "free"}
        ``"plane"``: the whole face; ``"line"``: its line element at ``across_mm`` (the ties fix the relative
        tilt along the travel only); ``"free"``: not stated.
    across_mm : float or None
        Across position of the line element, mm (line zones).
    reverse : bool
        True for the reverse pair of a tie (the datum toleranced against the other face).
    note : str
    """

    faces: tuple
    value_um: float
    zone: str
    across_mm: float | None = None
    reverse: bool = False
    note: str = ""


@dataclass(frozen=True)
class Squareness:
    """Squareness of a face to a perpendicular datum face.

    Attributes
    ----------
    faces : (str, str)
        ``(toleranced face, datum face)``.
    angle_urad, angle_arcsec : float
        ``90° - angle between the outward normals`` of the faces' least-squares planes (positive when an
        outside corner is open); ``nan`` when free.
    u_urad : float
        Standard uncertainty of the angle from the ties' uncertainties, µrad.
    value_um : float
        ISO 1101 perpendicularity zone of the toleranced face to the datum, µm (``nan`` when free).
    determined : bool
    """

    faces: tuple
    angle_urad: float
    angle_arcsec: float
    u_urad: float
    value_um: float
    determined: bool


@dataclass(frozen=True, eq=False)
class Twist:
    """Twist (winding) of a face, or between two rails, along the travel.

    Attributes
    ----------
    faces : tuple of str
        One face, or two (between two rails).
    source : str
        ``"survey"`` (the face's own survey), ``"twist run"`` (level readings) or ``"ties"`` (fitted rails).
    twist_urad : float
        Peak-to-valley of the across slope over the travel, µrad.
    twist_per_m_urad : float
        Largest peak-to-valley within any ``window_mm`` of travel, µrad.
    window_mm : float
    x_mm, slope_urad : ndarray, shape (k,)
        The across slope along the travel (relative to an arbitrary zero for twist runs).
    label : str
    """

    faces: tuple
    source: str
    twist_urad: float
    twist_per_m_urad: float
    window_mm: float
    x_mm: np.ndarray
    slope_urad: np.ndarray
    label: str = ""


@dataclass(frozen=True, eq=False)
class RailPair:
    """Two faces facing the same way at different across positions (two rails).

    Attributes
    ----------
    faces : (str, str)
    across_mm : (float, float)
        Centre lines of the two rails (body coordinates), mm.
    height_difference_min_um, height_difference_max_um : float
        Least and greatest ``wB - wA`` along the travel, µm (``nan`` when the ties leave it free).
    twist_urad, twist_per_m_urad : float
        Twist between the rails, µrad (``nan`` when free).
    x_mm, difference_um : ndarray, shape (k,)
    """

    faces: tuple
    across_mm: tuple
    height_difference_min_um: float
    height_difference_max_um: float
    twist_urad: float
    twist_per_m_urad: float
    x_mm: np.ndarray
    difference_um: np.ndarray


@dataclass(frozen=True, eq=False)
class BodyGeometry:
    """The fitted body and everything stated about it.

    Attributes
    ----------
    body : GuidewayBody
    faces : tuple of FaceGeometry
    parallelism : tuple of Parallelism
    squareness : tuple of Squareness
    twist : tuple of Twist
    rails : tuple of RailPair
    residuals : tuple of TieResidual
    redundancy : int
        Tie equations minus determined parameters (0: the residuals cannot show a wrong reading).
    free_faces : tuple of str
        Faces with at least one free plane parameter.
    warnings : tuple of str
    notes : tuple of str
    """

    body: GuidewayBody
    faces: tuple
    parallelism: tuple
    squareness: tuple
    twist: tuple
    rails: tuple
    residuals: tuple
    redundancy: int
    free_faces: tuple
    warnings: tuple = ()
    notes: tuple = ()
    _forms: dict = field(default=None, repr=False)

    def face(self, name: str) -> FaceGeometry:
        for f in self.faces:
            if f.name == name:
                return f
        raise KeyError(name)

    def outward_height_um(self, name: str, x_mm, s_mm, *, method: str = "linear") -> np.ndarray:
        """Outward height of face ``name`` in the body frame (form plus fitted plane), µm.

        Parameters
        ----------
        name : str
            The face.
        x_mm, s_mm : array_like
            Positions along the travel and across (body coordinates), mm; broadcast together.
        method : {"linear", "cubic"}
            Interpolation between stations.

        Returns
        -------
        ndarray
            Heights in µm; NaN outside the surveyed area (never extrapolated).
        """
        form = self._forms[name]
        x, s = np.broadcast_arrays(np.asarray(x_mm, float), np.asarray(s_mm, float))
        p = self.face(name).plane
        return form.height(x, s, method=method) + p.offset_um + 1e-3 * (p.tilt_x_urad * x + p.tilt_across_urad * s)


# --------------------------------------------------------------------------- helpers
class _Form:
    """A face's form: its heights minus their own least-squares plane, in body coordinates (x, s)."""

    def __init__(self, face: Face):
        self.face = face
        hm = face.surface
        self.x = hm.x_mm
        self.s = face.body_s(hm.y_mm)
        self.two_d = face.is_two_dimensional
        if self.two_d:
            A = np.column_stack([np.ones(hm.n), self.x, self.s])
        else:
            A = np.column_stack([np.ones(hm.n), self.x])
        coef, *_ = np.linalg.lstsq(A, hm.height_um, rcond=None)
        self.ls = coef if self.two_d else np.array([coef[0], coef[1], 0.0])
        self.z = hm.height_um - (self.ls[0] + self.ls[1] * self.x + self.ls[2] * self.s)

    def height(self, x, s, *, method: str = "linear"):
        """Form heights (µm) at body positions; NaN outside the survey."""
        x = np.asarray(x, float)
        s = np.asarray(s, float)
        if not self.two_d:
            # a face surveyed on one line: heights along x on that line, at any s of the line only
            order = np.argsort(self.x)
            xs, zs = self.x[order], self.z[order]
            out = np.interp(x, xs, zs, left=np.nan, right=np.nan)
            on_line = np.abs(s - self.s.mean()) <= 1e-6 * max(1.0, abs(float(self.s.mean())))
            return np.where(on_line, out, np.nan)
        raw = self.face.surface.sample(x, self.face.file_y(s), method=method)
        return raw - (self.ls[0] + self.ls[1] * x + self.ls[2] * s)

    def station_xs(self, limit: int = 400) -> np.ndarray:
        """Distinct station positions along the travel (at most ``limit``, evenly thinned), mm."""
        xs = np.unique(np.round(self.x, 6))
        if xs.size > limit:
            xs = xs[np.linspace(0, xs.size - 1, limit).round().astype(int)]
        return xs

    def across_slope_urad(self, x_mm) -> np.ndarray:
        """Least-squares slope of the form's cross-section at each x, µrad (NaN where fewer than 2 points)."""
        x_mm = np.atleast_1d(np.asarray(x_mm, float))
        if not self.two_d:
            return np.full(x_mm.shape, np.nan)
        smin, smax = self.face.s_range_mm
        ss = np.linspace(smin, smax, _ACROSS_SAMPLES)
        Z = self.height(x_mm[:, None], ss[None, :])
        out = np.full(x_mm.shape, np.nan)
        for i in range(x_mm.size):
            ok = np.isfinite(Z[i])
            if ok.sum() >= 2 and np.ptp(ss[ok]) > 0:
                b = np.polyfit(ss[ok], Z[i, ok], 1)[0]
                out[i] = 1e3 * b  # µm/mm -> µrad
        return out


def window_ptp(x_mm, v, window_mm: float = TWIST_WINDOW_MM) -> float:
    """Largest peak-to-valley of ``v`` over any stretch of ``window_mm`` of ``x_mm``.

    Parameters
    ----------
    x_mm : array_like, shape (k,)
        Positions, mm.
    v : array_like, shape (k,)
        Values (NaN ignored).
    window_mm : float
        Length of the stretch, mm.

    Returns
    -------
    float
        The largest peak-to-valley (the whole range when the data span less than the window); NaN with no
        finite value.

    Examples
    --------
    >>> window_ptp([0, 500, 1000, 1500, 2000], [0, 1, 2, 3, 4], 1000.0)
    2.0
    """
    x = np.asarray(x_mm, float)
    v = np.asarray(v, float)
    ok = np.isfinite(v) & np.isfinite(x)
    x, v = x[ok], v[ok]
    if v.size == 0:
        return float("nan")
    order = np.argsort(x)
    x, v = x[order], v[order]
    best = 0.0
    j = 0
    for i in range(x.size):
        while x[i] - x[j] > window_mm * (1 + 1e-12):
            j += 1
        best = max(best, float(np.ptp(v[j : i + 1])))
    return best


def _opposed(a: Face, b: Face) -> bool:
    return a.axis == b.axis and a.sign != b.sign


def _same_facing(a: Face, b: Face) -> bool:
    return a.axis == b.axis and a.sign == b.sign


def _perpendicular(a: Face, b: Face) -> bool:
    return a.axis != b.axis


class _Fit:
    """Weighted least-squares fit of the face planes (and twist-run zeros) to the ties."""

    def __init__(self, body: GuidewayBody, forms: dict):
        self.body = body
        self.forms = forms
        self.names = body.face_names
        self.index = {n: i for i, n in enumerate(self.names)}
        nf = len(self.names)
        self.n = 3 * nf + len(body.twist)
        rows, rhs, u, info = [], [], [], []

        def col(face, k):
            return 3 * self.index[face] + k

        def need(value, tie_kind, label, face):
            if not np.all(np.isfinite(value)):
                f = body.face(face)
                xr = f.x_range_mm
                sr = f.s_range_mm
                raise GeometryError(
                    f"the {tie_kind} tie {label} lies outside the survey of face {face!r} "
                    f"(x {xr[0]:g} to {xr[1]:g} mm, across {min(sr):g} to {max(sr):g} mm)",
                    where=body.source or None,
                    fix="give tie positions within the surveyed area of both faces (never extrapolated), "
                    "or extend the survey",
                )
            return value

        for t in body.thickness:
            A, B = t.faces
            r = np.zeros(self.n)
            for f in (A, B):
                r[col(f, 0)] += 1.0
                r[col(f, 1)] += t.x_mm
                r[col(f, 2)] += t.across_mm
            fa = need(forms[A].height(t.x_mm, t.across_mm), "thickness", t.label, A)
            fb = need(forms[B].height(t.x_mm, t.across_mm), "thickness", t.label, B)
            rows.append(r)
            rhs.append(t.value_um - float(fa) - float(fb))
            u.append(t.u_um)
            info.append(("thickness", t.faces, t.label, t.x_mm, t.value_um, "um", float(fa + fb)))
        for t in body.heights:
            A, B = t.faces
            sa, sb = t.across_mm
            r = np.zeros(self.n)
            r[col(B, 0)] += 1.0
            r[col(B, 1)] += t.x_mm
            r[col(B, 2)] += sb
            r[col(A, 0)] -= 1.0
            r[col(A, 1)] -= t.x_mm
            r[col(A, 2)] -= sa
            fa = need(forms[A].height(t.x_mm, sa), "height", t.label, A)
            fb = need(forms[B].height(t.x_mm, sb), "height", t.label, B)
            rows.append(r)
            rhs.append(t.value_um - float(fb) + float(fa))
            u.append(t.u_um)
            info.append(("height", t.faces, t.label, t.x_mm, t.value_um, "um", float(fb - fa)))
        for t in body.squareness:
            A, B = t.faces
            fa, fb = body.face(A), body.face(B)
            # value = -(σB·θA + σA·θB), θ = 1e3 c + across slope of the form at x (µrad)
            ta = float(forms[A].across_slope_urad(t.x_mm)[0]) if forms[A].two_d else 0.0
            tb = float(forms[B].across_slope_urad(t.x_mm)[0]) if forms[B].two_d else 0.0
            need(ta, "squareness", t.label, A)
            need(tb, "squareness", t.label, B)
            r = np.zeros(self.n)
            r[col(A, 2)] -= 1e3 * fb.sign
            r[col(B, 2)] -= 1e3 * fa.sign
            form_part = -(fb.sign * ta + fa.sign * tb)
            rows.append(r)
            rhs.append(t.value_urad - form_part)
            u.append(t.u_urad)
            info.append(("squareness", t.faces, t.label, t.x_mm, t.value_urad, "urad", form_part))
        for k, run in enumerate(body.twist):
            zc = 3 * nf + k
            if len(run.faces) == 1:
                (A,) = run.faces
                form_part = forms[A].across_slope_urad(run.x_mm)
                if not forms[A].two_d:
                    form_part = np.zeros(run.x_mm.size)
                need(form_part, "twist", run.label, A)
                for xi, vi, fi in zip(run.x_mm, run.slope_urad, form_part):
                    r = np.zeros(self.n)
                    r[col(A, 2)] = 1e3
                    r[zc] = 1.0
                    rows.append(r)
                    rhs.append(vi - fi)
                    u.append(run.u_urad)
                    info.append(("twist", run.faces, run.label, float(xi), float(vi), "urad", float(fi)))
            else:
                A, B = run.faces
                sa, sb = run.across_mm
                g = 1e3 / (sb - sa)
                fa = need(forms[A].height(run.x_mm, sa), "twist", run.label, A)
                fb = need(forms[B].height(run.x_mm, sb), "twist", run.label, B)
                for xi, vi, fai, fbi in zip(run.x_mm, run.slope_urad, fa, fb):
                    r = np.zeros(self.n)
                    r[col(B, 0)] += g
                    r[col(B, 1)] += g * xi
                    r[col(B, 2)] += g * sb
                    r[col(A, 0)] -= g
                    r[col(A, 1)] -= g * xi
                    r[col(A, 2)] -= g * sa
                    r[zc] = 1.0
                    form_part = g * (fbi - fai)
                    rows.append(r)
                    rhs.append(vi - form_part)
                    u.append(run.u_urad)
                    info.append(("twist", run.faces, run.label, float(xi), float(vi), "urad", float(form_part)))
        self.A = np.array(rows).reshape(len(rows), self.n)
        self.rhs = np.array(rhs, dtype=float)
        self.u = np.array(u, dtype=float)
        self.info = info

        # gauge: primary datum fully, secondary datum offset and tilt along
        primary = body.primary_datum
        fixed = {col(primary.name, k) for k in range(3)}
        self.datum_role = {primary.name: "primary"}
        other = [f for f in body.faces if f.axis != primary.axis]
        if other:
            sec = other[0]
            fixed |= {col(sec.name, 0), col(sec.name, 1)}
            self.datum_role[sec.name] = "secondary"
        self.fixed = sorted(fixed)
        self.free_cols = [j for j in range(self.n) if j not in fixed]
        self._solve()

    def _solve(self):
        m = self.A.shape[0]
        p = np.zeros(self.n)
        cols = self.free_cols
        if m == 0 or not cols:
            self.null = np.eye(len(cols)) if cols else np.zeros((0, 0))
            self.colscale = np.ones(len(cols))
            self.p = p
            self.rank = 0
            self.cov = np.full((len(cols), len(cols)), np.nan)
            self.resid = np.zeros(m)
            return
        Aw = self.A[:, cols] / self.u[:, None]
        bw = self.rhs / self.u
        scale = np.linalg.norm(Aw, axis=0)
        scale[scale == 0] = 1.0
        As = Aw / scale
        U, S, Vt = np.linalg.svd(As, full_matrices=True)
        tol = _RANK_RTOL * (S[0] if S.size else 1.0) * max(As.shape)
        rank = int(np.sum(S > tol))
        self.rank = rank
        self.null = Vt[rank:].T  # columns: null-space basis in scaled coordinates
        self.colscale = scale
        # minimum-norm solution in scaled coordinates (free directions held at 0)
        y = (U[:, :rank].T @ bw) / S[:rank]
        ps = Vt[:rank].T @ y
        p[cols] = ps / scale
        self.p = p
        # covariance of the scaled parameters restricted to the determined subspace: V S^-2 V^T
        Vr = Vt[:rank].T / S[:rank]
        self.cov_scaled = Vr @ Vr.T
        self.resid = self.A @ p - self.rhs

    def determined(self, vec) -> bool:
        """Is the combination ``vec @ p`` fixed by the ties (given the gauge)?"""
        vec = np.asarray(vec, float)
        v = vec[self.free_cols] / self.colscale
        if not np.any(v):
            return True
        if self.null.size == 0:
            return True
        proj = self.null.T @ v
        return float(np.linalg.norm(proj)) <= 1e-7 * float(np.linalg.norm(v))

    def std(self, vec) -> float:
        """Standard uncertainty of ``vec @ p`` from the ties' uncertainties (NaN without ties)."""
        if self.A.shape[0] == 0 or not self.free_cols:
            return 0.0 if not np.any(np.asarray(vec)[self.free_cols]) else float("nan")
        v = np.asarray(vec, float)[self.free_cols] / self.colscale
        return float(math.sqrt(max(v @ self.cov_scaled @ v, 0.0)))

    def unit(self, face: str, k: int) -> np.ndarray:
        e = np.zeros(self.n)
        e[3 * self.index[face] + k] = 1.0
        return e

    def plane(self, face: str):
        i = 3 * self.index[face]
        return self.p[i], self.p[i + 1], self.p[i + 2]


# --------------------------------------------------------------------------- evaluation
def evaluate_body(body: GuidewayBody) -> BodyGeometry:
    """Fit the faces to the ties and state the body's geometry.

    Parameters
    ----------
    body : GuidewayBody
        Faces (with their measured surfaces) and ties.

    Returns
    -------
    BodyGeometry

    Raises
    ------
    GeometryError
        A tie outside the surveyed area of a face it names.

    Examples
    --------
    Two opposed faces, flat, with a thickness that grows by 2 µm over 1000 mm on the centre line:
    the underside's tilt along the travel is fitted, its across tilt stays free, and the parallelism is
    stated for the line element at the ties' across position.

    >>> import numpy as np
    >>> from flatcheck.form import HeightMap
    >>> from flatcheck.guideway import Face, GuidewayBody, ThicknessTie, evaluate_body
    >>> X, Y = np.meshgrid(np.linspace(0, 1000, 11), np.linspace(0, 100, 5))
    >>> flat = HeightMap(X.ravel(), Y.ravel(), np.zeros(X.size))
    >>> ties = tuple(ThicknessTie(("underside", "top"), x, 0.0, 0.002 * x) for x in (0.0, 500.0, 1000.0))
    >>> body = GuidewayBody("b", 1000.0, (Face("top", "+z", flat), Face("underside", "-z", flat)), ties)
    >>> g = evaluate_body(body)
    >>> round(g.face("underside").plane.tilt_x_urad, 6), g.face("underside").plane.free
    (2.0, ('tilt across',))
    >>> p = g.parallelism[0]
    >>> p.faces, p.zone, round(p.value_um, 6)
    (('underside', 'top'), 'line', 2.0)
    """
    forms = {f.name: _Form(f) for f in body.faces}
    fit = _Fit(body, forms)
    warnings, notes = [], []

    # ---- faces
    faces = []
    free_faces = []
    for f in body.faces:
        form = forms[f.name]
        a, b, c = fit.plane(f.name)
        role = fit.datum_role.get(f.name, "")
        free = []
        for k in range(3):
            j = 3 * fit.index[f.name] + k
            if j in fit.fixed:
                continue
            if k == 2 and not form.two_d and not fit.determined(fit.unit(f.name, 2)):
                free.append(_PARAM_NAMES[k])
                continue
            if not fit.determined(fit.unit(f.name, k)):
                free.append(_PARAM_NAMES[k])
        if free:
            free_faces.append(f.name)
        plane = FacePlane(float(a), float(1e3 * b), float(1e3 * c), tuple(free), role)
        hm = f.surface
        if form.two_d:
            from ..form import minimum_zone

            flat = float(minimum_zone(form.x, form.s, hm.height_um).flatness_um)
        else:
            flat = float("nan")
        xs = form.station_xs()
        prof = form.height(xs, np.full(xs.shape, f.centre_mm)) if form.two_d else form.height(
            xs, np.full(xs.shape, float(form.s.mean()))
        )
        ok = np.isfinite(prof)
        if ok.sum() >= 2 and np.ptp(xs[ok]) > 0:
            from ..form import evaluate_straightness

            straight = float(evaluate_straightness(xs[ok], prof[ok]).straightness_um)
        else:
            straight = float("nan")
        ax_x = xs if form.two_d else np.array([])
        ax_s = form.across_slope_urad(xs) if form.two_d else np.array([])
        faces.append(FaceGeometry(f.name, f.normal, f.survey, hm.n, flat, straight, plane, ax_x, ax_s,
                                  f.x_range_mm))
        if len(free) == 3:
            warnings.append(
                f"face {f.name!r} is tied to no other face: its offset and tilts in the body are free (held at "
                "nominal); figures that need them are not stated"
            )
        elif free:
            warnings.append(
                f"face {f.name!r}: the ties leave its {' and '.join(free)} free (held at nominal); figures that "
                "need them are not stated"
            )
        if not form.two_d:
            notes.append(f"face {f.name!r} was surveyed on one line: no flatness or twist from its survey")

    geom_faces = {g.name: g for g in faces}

    # ---- residuals
    residuals = []
    for (kind, fcs, label, x, measured, unit, form_part), r, u in zip(fit.info, fit.resid, fit.u):
        residuals.append(TieResidual(kind, tuple(fcs), label, float(x), float(measured),
                                     float(measured + r), float(-r), float(u), unit))
    m = fit.A.shape[0]
    redundancy = int(m - fit.rank)
    if m and redundancy == 0:
        warnings.append(
            "the ties are just enough to place the faces (no redundancy): their residuals cannot show a wrong "
            "reading; repeat a tie or add one to check them"
        )
    for t in residuals:
        if abs(t.normalized) > OUTLIER_RATIO:
            unit = "µm" if t.unit == "um" else "µrad"
            warnings.append(
                f"{t.kind} tie {t.label} ({'/'.join(t.faces)}) differs from the fitted body by {t.residual:+.3g} {unit}, "
                f"{abs(t.normalized):.1f} times its standard uncertainty: check the reading and the survey"
            )

    # ---- helpers on stations (outward heights in the body frame)
    def station_w(name):
        form = forms[name]
        a, b, c = fit.plane(name)
        return form.x, form.s, form.z + a + b * form.x + c * form.s

    def mz_datum(name):
        x, s, w = station_w(name)
        if forms[name].two_d:
            from ..form import minimum_zone

            mz = minimum_zone(x, s, w)
            return mz.b_um_per_mm, mz.c_um_per_mm
        from ..form import minimum_zone_line

        _, bb, _ = minimum_zone_line(x, w)
        return bb, 0.0

    # ---- parallelism
    pairs = []  # (toleranced, datum, {face: across positions of its ties}, kind)
    seen = {}

    def add_pair(a_name, b_name, across: dict, kind):
        datum = body.datum
        if datum in (a_name, b_name):
            tol, dat = (b_name, a_name) if datum == a_name else (a_name, b_name)
        else:
            tol, dat = a_name, b_name
        key = (tol, dat)
        if key not in seen:
            seen[key] = {tol: [], dat: []}
            pairs.append((tol, dat, seen[key], kind))
        for f, v in across.items():
            seen[key][f].append(v)

    for t in body.thickness:
        add_pair(t.faces[0], t.faces[1], {t.faces[0]: t.across_mm, t.faces[1]: t.across_mm}, "opposed")
    for t in body.heights:
        add_pair(t.faces[0], t.faces[1], {t.faces[0]: t.across_mm[0], t.faces[1]: t.across_mm[1]}, "same")
    parallelism = []
    for tol, dat, across, kind in pairs:
        for reverse, (fa, fb) in ((False, (tol, dat)), (True, (dat, tol))):
            parallelism.append(_parallelism(fa, fb, kind, across[fa], reverse, fit, forms, body, station_w, mz_datum))

    # ---- squareness: every perpendicular pair (the tie's datum; else the primary datum's axis)
    squareness = []
    sq_pairs = []
    for t in body.squareness:
        A, B = t.faces
        if body.datum == A:
            A, B = B, A
        if (A, B) not in sq_pairs and (B, A) not in sq_pairs:
            sq_pairs.append((A, B))
    prim = body.primary_datum
    for fa in body.faces:
        for fb in body.faces:
            if fa.name >= fb.name or not _perpendicular(fa, fb):
                continue
            if (fa.name, fb.name) in sq_pairs or (fb.name, fa.name) in sq_pairs:
                continue
            # datum: the face on the primary datum's axis
            if fb.axis == prim.axis:
                sq_pairs.append((fa.name, fb.name))
            else:
                sq_pairs.append((fb.name, fa.name))
    for A, B in sq_pairs:
        squareness.append(_squareness(A, B, fit, forms, body, station_w, mz_datum))

    # ---- twist
    twist = []
    for f in body.faces:
        g = geom_faces[f.name]
        if forms[f.name].two_d and g.across_slope_urad.size and np.isfinite(g.across_slope_urad).sum() >= 2:
            ok = np.isfinite(g.across_slope_urad)
            twist.append(Twist((f.name,), "survey", float(np.ptp(g.across_slope_urad[ok])),
                               window_ptp(g.across_x_mm, g.across_slope_urad), TWIST_WINDOW_MM,
                               g.across_x_mm[ok], g.across_slope_urad[ok], f"survey of {f.name!r}"))
    for run in body.twist:
        twist.append(Twist(tuple(run.faces), "twist run", float(np.ptp(run.slope_urad)),
                           window_ptp(run.x_mm, run.slope_urad), TWIST_WINDOW_MM,
                           np.asarray(run.x_mm, float), np.asarray(run.slope_urad, float), run.label))

    # ---- rails
    rails = []
    for i, fa in enumerate(body.faces):
        for fb in body.faces[i + 1 :]:
            if not _same_facing(fa, fb) or abs(fa.centre_mm - fb.centre_mm) < 1e-9:
                continue
            rails.append(_rails(fa, fb, fit, forms))
    for r in rails:
        if np.isfinite(r.twist_urad):
            twist.append(Twist(r.faces, "ties", r.twist_urad, r.twist_per_m_urad, TWIST_WINDOW_MM, r.x_mm,
                               1e3 * r.difference_um / (r.across_mm[1] - r.across_mm[0]),
                               f"rails {r.faces[0]!r} and {r.faces[1]!r}"))

    notes.append(
        f"datum system: primary datum {prim.name!r} (plane fixed)"
        + (f", secondary datum {[n for n, r in fit.datum_role.items() if r == 'secondary'][0]!r} "
           "(offset and tilt along fixed)" if "secondary" in fit.datum_role.values() else "")
        + "; datum planes are the minimum-zone planes of the datum faces (ISO 5459 association, from memory)"
    )
    return BodyGeometry(
        body=body,
        faces=tuple(faces),
        parallelism=tuple(parallelism),
        squareness=tuple(squareness),
        twist=tuple(twist),
        rails=tuple(rails),
        residuals=tuple(residuals),
        redundancy=redundancy,
        free_faces=tuple(free_faces),
        warnings=tuple(warnings),
        notes=tuple(notes),
        _forms=forms,
    )


def _parallelism(tol, dat, kind, across, reverse, fit, forms, body, station_w, mz_datum) -> Parallelism:
    sgn = 1.0 if kind == "opposed" else -1.0
    # relative tilts that decide the zone: along (b) and across (c)
    vb = fit.unit(tol, 1) + sgn * fit.unit(dat, 1)
    vc = fit.unit(tol, 2) + sgn * fit.unit(dat, 2)
    along_ok = fit.determined(vb)
    across_ok = fit.determined(vc) and forms[tol].two_d and forms[dat].two_d
    if not along_ok:
        return Parallelism((tol, dat), float("nan"), "free", None, reverse,
                           "the ties do not fix the faces' relative tilt along the travel")
    bD, cD = mz_datum(dat)
    x, s, w = station_w(tol)
    if across_ok:
        d = w + sgn * (bD * x + cD * s)
        return Parallelism((tol, dat), float(np.ptp(d)), "plane", None, reverse)
    # line element of the toleranced face at the ties' across position
    s0 = float(np.mean(across))
    form = forms[tol]
    xs = form.station_xs()
    if form.two_d:
        prof = form.height(xs, np.full(xs.shape, s0))
        a, b, c = fit.plane(tol)
        w_line = prof + a + b * xs + c * s0
    else:
        order = np.argsort(x)
        xs, w_line = x[order], w[order]
    ok = np.isfinite(w_line)
    d = w_line[ok] + sgn * bD * xs[ok]
    note = ("the ties fix the relative tilt along the travel only: parallelism of the line element at "
            f"{s0:g} mm across (ISO 1101, a line to a datum plane)")
    return Parallelism((tol, dat), float(np.ptp(d)), "line", s0, reverse, note)


def _squareness(A, B, fit, forms, body, station_w, mz_datum) -> Squareness:
    fa, fb = body.face(A), body.face(B)
    vec = -1e3 * (fb.sign * fit.unit(A, 2) + fa.sign * fit.unit(B, 2))
    ok = fit.determined(vec) and forms[A].two_d and forms[B].two_d
    if not ok:
        nan = float("nan")
        return Squareness((A, B), nan, nan, nan, nan, False)
    angle = float(vec @ fit.p)
    u = fit.std(vec)
    from ..form import minimum_zone_line

    _, cD = mz_datum(B)
    c_zone = -fa.sign * fb.sign * cD
    x, s, w = station_w(A)
    r = w - c_zone * s
    _, _, t = minimum_zone_line(x, r)
    return Squareness((A, B), angle, angle * URAD_TO_ARCSEC, u, float(t), True)


def _rails(fa: Face, fb: Face, fit, forms) -> RailPair:
    sa, sb = fa.centre_mm, fb.centre_mm
    vb = fit.unit(fb.name, 1) - fit.unit(fa.name, 1)
    voff = fit.unit(fb.name, 0) - fit.unit(fa.name, 0) + sb * fit.unit(fb.name, 2) - sa * fit.unit(fa.name, 2)
    xa, xb = forms[fa.name].station_xs(), forms[fb.name].station_xs()
    lo, hi = max(xa.min(), xb.min()), min(xa.max(), xb.max())
    xs = np.unique(np.concatenate([xa, xb]))
    xs = xs[(xs >= lo) & (xs <= hi)]
    nan = float("nan")
    if xs.size < 2 or not fit.determined(vb):
        return RailPair((fa.name, fb.name), (sa, sb), nan, nan, nan, nan, xs, np.full(xs.shape, nan))
    a1, b1, c1 = fit.plane(fa.name)
    a2, b2, c2 = fit.plane(fb.name)
    wa = forms[fa.name].height(xs, np.full(xs.shape, sa if forms[fa.name].two_d else forms[fa.name].s.mean()))
    wb = forms[fb.name].height(xs, np.full(xs.shape, sb if forms[fb.name].two_d else forms[fb.name].s.mean()))
    diff = (wb + a2 + b2 * xs + c2 * sb) - (wa + a1 + b1 * xs + c1 * sa)
    ok = np.isfinite(diff)
    theta = 1e3 * diff / (sb - sa)
    tw = float(np.ptp(theta[ok])) if ok.sum() >= 2 else nan
    twm = window_ptp(xs, theta)
    if fit.determined(voff):
        dmin, dmax = float(np.nanmin(diff)), float(np.nanmax(diff))
    else:
        dmin = dmax = nan
    return RailPair((fa.name, fb.name), (sa, sb), dmin, dmax, tw, twm, xs, diff)
