"""Written fringe readings under an optical flat, reduced to a surface estimate and a flatness.

What the trade writes down
--------------------------
With the flat tilted so that a perfect part would show straight, evenly spaced fringes, the
reader looks at a fringe running across the middle of the part and writes how far its middle
departs from the straight line through its ends, in fringe spacings (the *bend*), and whether it
bows away from the contact edge (the part is convex, high in the middle) or towards it (concave).
With the flat laid to touch at one point instead, the fringes close into rings, and the reader
counts the rings from the contact to the edge. One fringe is half a wavelength of air film
(R. Williamson, "Fringe elements", SPIE oemagazine, Oct 2004); the rules for convex and concave
are common practice, no single source.

Model
-----
A bend of ``b`` fringes along a fringe of length ``L`` through the middle of the part is the sag
of the surface along that line: ``s = b * wavelength / 2``, middle relative to the ends. A ring
count ``N`` from the central contact to the edge is the same sag. flatcheck fits the quadratic

    h(x, y) = a x^2 + b y^2 + c x y        (x, y in mm from the part's centre, h in nm)

whose sag along direction ``theta`` over a chord ``L`` is ``-(a cos^2 + b sin^2 + c sin cos) L^2 / 4``.
Three directions fix all three coefficients (weighted least squares when there are more). Two
directions cannot see ``c`` (a twist: straight fringes along both), one direction cannot tell a
sphere from a cylinder or a saddle; the estimate then assumes ``c = 0``, or a sphere, and says so.

Flatness is the minimum zone (and the least-squares peak-to-valley) of the estimate over the
part. Its uncertainty (JCGM 100:2008, law of propagation)
combines the reading limit of each bend (sensitivities by the larger one-sided difference, since
a zone has kinks), by eye about lambda/20 of height, a tenth of a fringe
(Takatsuji & Bitou, "Flatness", Handbook of Optical Metrology, CRC 2009), taken as the half-width
of a rectangular distribution, and the flat's own flatness from its certificate: the readings see
part and flat together, and since the zone of a sum is at most the sum of the zones, the flat
moves the flatness by at most its own flatness (rectangular, half-width that flatness).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..errors import InputValueError

__all__ = [
    "LIGHT_SOURCES",
    "EYE_LIMIT_FRINGES",
    "FringeReading",
    "FringeReadings",
    "FringeEstimate",
    "reduce_fringe_readings",
    "wavelength_of",
]

#: Wavelengths in air of the usual monochromatic sources, nm. Fringe heights (half of each) are
#: given by R. Williamson, "Fringe elements", SPIE oemagazine, Oct 2004, as He 587.6 -> 293.8,
#: Na 589.0 -> 294.5, Hg green 546.1 -> 273.0, HeNe 632.8 -> 316.4 nm; the extra digits of helium
#: (587.56) and mercury (546.07) are from memory.
LIGHT_SOURCES = {
    "helium": 587.56,
    "sodium": 589.0,
    "mercury-green": 546.07,
    "hene": 632.8,
}

#: Reading limit of a fringe bend by eye: about lambda/20 of height, i.e. a tenth of a fringe
#: (Takatsuji & Bitou, "Flatness", Handbook of Optical Metrology, CRC 2009, pp. 423-435; secondary).
EYE_LIMIT_FRINGES = 0.1

_SQRT3 = math.sqrt(3.0)  # rectangular distribution: u = half-width / sqrt(3) (JCGM 100:2008, 4.3.7)


def wavelength_of(source: str, *, where: str | None = None) -> float:
    """Wavelength in nm of a named light source (helium, sodium, mercury-green, hene).

    Raises
    ------
    InputValueError
        An unknown name (the message lists the known ones).
    """
    key = str(source).strip().lower().replace(" ", "-").replace("_", "-")
    key = {"he": "helium", "na": "sodium", "hg": "mercury-green", "mercury": "mercury-green", "he-ne": "hene"}.get(key, key)
    if key not in LIGHT_SOURCES:
        raise InputValueError(
            f"unknown light source {source!r}",
            where=where,
            fix=f"use one of {', '.join(LIGHT_SOURCES)}, or give wavelength_nm",
        )
    return LIGHT_SOURCES[key]


@dataclass(frozen=True)
class FringeReading:
    """One written observation.

    Attributes
    ----------
    direction_deg : float or None
        Direction of the fringe that was read (the line of the part it samples), degrees
        anticlockwise from the part's x axis; None for circular rings (every direction alike).
    sag_fringes : float
        The sag along that line in fringes: positive convex (middle high), negative concave.
    kind : str
        ``"bend"`` (open fringes) or ``"rings"`` (closed fringes around a contact point).
    length_mm : float or None
        Length of the line read, mm; None for the part's full chord through its centre.
    irregularity_fringes : float
        Departure of the fringe from a smooth arc, fringes (not part of the sag).
    u_fringes : float
        Standard uncertainty of the reading, fringes.
    label : str
        How messages name the reading ("reading 2").
    """

    direction_deg: float | None
    sag_fringes: float
    kind: str = "bend"
    length_mm: float | None = None
    irregularity_fringes: float = 0.0
    u_fringes: float = EYE_LIMIT_FRINGES / _SQRT3
    label: str = ""


@dataclass(frozen=True)
class FringeReadings:
    """Fringe readings of one part.

    Attributes
    ----------
    wavelength_nm : float
        Wavelength of the light, nm.
    light : str
        The source as written (``"helium"``) or ``"stated wavelength"``.
    shape : str
        ``"rect"`` or ``"circle"``.
    length_mm, width_mm : float
        Size of the part along x and y, mm (a circle: both the diameter).
    readings : tuple of FringeReading
    flat_flatness_nm : float
        Peak-to-valley flatness of the optical flat from its certificate, nm (0 if not stated).
    ident, description : str
        The part, as written.
    """

    wavelength_nm: float
    light: str
    shape: str
    length_mm: float
    width_mm: float
    readings: tuple
    flat_flatness_nm: float = 0.0
    ident: str = ""
    description: str = ""

    @property
    def fringe_nm(self) -> float:
        """Height of one fringe, half the wavelength, nm."""
        return self.wavelength_nm / 2.0


@dataclass(frozen=True)
class FringeEstimate:
    """The surface estimated from fringe readings and what it states.

    Attributes
    ----------
    coefficients_nm_per_mm2 : tuple of float
        ``(a, b, c)`` of ``h = a x^2 + b y^2 + c x y`` (x, y mm from the part's centre, h nm).
    model : str
        ``"full quadratic"``, ``"no twist"`` (c = 0 assumed) or ``"sphere"`` (a = b, c = 0 assumed).
    x_mm, y_mm : ndarray, shape (n,)
        Points of the estimate over the part, mm from its lower-left corner.
    height_nm : ndarray, shape (n,)
        The estimated surface there, nm.
    minimum_zone_nm : float
        Minimum-zone flatness of the estimate, nm.
    least_squares_nm : float
        Peak-to-valley about the least-squares plane, nm.
    standard_uncertainty_nm, expanded_uncertainty_nm : float
        Of ``minimum_zone_nm``; expanded with k = 2.
    uncertainty_budget : tuple of (str, float)
        Each contribution to the standard uncertainty, nm.
    irregularity_nm : float
        Largest irregularity written, nm (not in the estimate).
    fitted_sag_fringes : tuple of float
        The sag of the estimate along each reading's line, fringes (compare with the readings).
    alternatives : tuple of (str, float)
        Other shapes the readings allow, with their minimum-zone flatness in nm.
    observed, cannot_tell, assumptions : tuple of str
        Plain statements for the report.
    wavelength_nm : float
    """

    coefficients_nm_per_mm2: tuple
    model: str
    x_mm: np.ndarray
    y_mm: np.ndarray
    height_nm: np.ndarray
    minimum_zone_nm: float
    least_squares_nm: float
    standard_uncertainty_nm: float
    expanded_uncertainty_nm: float
    uncertainty_budget: tuple
    irregularity_nm: float
    fitted_sag_fringes: tuple
    alternatives: tuple
    observed: tuple
    cannot_tell: tuple
    assumptions: tuple
    wavelength_nm: float
    readings: FringeReadings = field(repr=False, default=None)

    @property
    def fringe_nm(self) -> float:
        """Height of one fringe, nm."""
        return self.wavelength_nm / 2.0

    @property
    def minimum_zone_fringes(self) -> float:
        """Minimum-zone flatness in fringes."""
        return self.minimum_zone_nm / self.fringe_nm

    def heightmap(self, *, label: str = ""):
        """The estimate as a :class:`flatcheck.HeightMap` (positions mm, heights µm)."""
        from flatcheck import HeightMap

        r = self.readings
        return HeightMap(
            self.x_mm, self.y_mm, self.height_nm / 1000.0,
            length_mm=r.length_mm if r else None, width_mm=r.width_mm if r else None, label=label,
        )


# ----------------------------------------------------------------------------- geometry
def _chord_mm(shape: str, length_mm: float, width_mm: float, theta: float) -> float:
    """Length of the part's chord through its centre along direction ``theta`` (rad), mm."""
    if shape == "circle":
        return length_mm
    c, s = abs(math.cos(theta)), abs(math.sin(theta))
    return min(length_mm / c if c > 1e-12 else math.inf, width_mm / s if s > 1e-12 else math.inf)


def _points(shape: str, length_mm: float, width_mm: float, n: int = 25):
    """Points covering the part, centred coordinates (mm): a grid plus the outline."""
    u = np.linspace(-0.5, 0.5, n)
    X, Y = np.meshgrid(u * length_mm, u * width_mm)
    x, y = X.ravel(), Y.ravel()
    if shape == "circle":
        inside = x * x + y * y <= (0.5 * length_mm) ** 2 * (1 + 1e-12)
        x, y = x[inside], y[inside]
        t = np.linspace(0, 2 * np.pi, 4 * n, endpoint=False)
        x = np.concatenate([x, 0.5 * length_mm * np.cos(t)])
        y = np.concatenate([y, 0.5 * length_mm * np.sin(t)])
    return x, y


def _rows(theta: float, chord: float) -> np.ndarray:
    """Sag (nm, convex positive) per unit of (a, b, c) along direction ``theta`` over ``chord``."""
    c, s = math.cos(theta), math.sin(theta)
    return -np.array([c * c, s * s, s * c]) * chord * chord / 4.0


def _equations(readings: FringeReadings):
    """Design rows, sags (nm) and standard uncertainties (nm), one set per reading (rings: three rows)."""
    A, sag, u, owner = [], [], [], []
    half = readings.fringe_nm
    for i, r in enumerate(readings.readings):
        if r.direction_deg is None:  # circular rings: the same sag in three directions, weight shared
            thetas, share = [0.0, math.pi / 3, 2 * math.pi / 3], _SQRT3
        else:
            thetas, share = [math.radians(r.direction_deg)], 1.0
        for t in thetas:
            chord = r.length_mm if r.length_mm else _chord_mm(readings.shape, readings.length_mm, readings.width_mm, t)
            A.append(_rows(t, chord))
            sag.append(r.sag_fringes * half)
            u.append(r.u_fringes * half * share)
            owner.append(i)
    return np.array(A), np.array(sag), np.array(u), np.array(owner)


def _model(A: np.ndarray) -> tuple:
    """The model the directions can carry: (name, basis matrix mapping parameters to (a, b, c))."""
    full = np.eye(3)
    s = np.linalg.svd(A / np.abs(A).max(), compute_uv=False)
    if s.size >= 3 and s[2] > 1e-6 * s[0]:
        return "full quadratic", full
    no_twist = full[:, :2]
    s2 = np.linalg.svd(A @ no_twist / np.abs(A).max(), compute_uv=False)
    if s2.size >= 2 and s2[1] > 1e-6 * s2[0]:
        return "no twist", no_twist
    return "sphere", np.array([[1.0], [1.0], [0.0]])


def _solve(A, sag, u, basis) -> np.ndarray:
    """Weighted least squares for (a, b, c) in ``basis``."""
    w = 1.0 / u
    p, *_ = np.linalg.lstsq((A @ basis) * w[:, None], sag * w, rcond=None)
    return basis @ p


def _zone_um(x, y, z_nm):
    """(minimum zone, least-squares peak-to-valley) of heights in nm, returned in nm."""
    from flatcheck import least_squares_plane, minimum_zone

    z = z_nm / 1000.0
    if np.ptp(z) == 0:
        return 0.0, 0.0
    return 1000.0 * minimum_zone(x, y, z).flatness_um, 1000.0 * least_squares_plane(x, y, z).flatness_um


def _surface(coef, x, y):
    a, b, c = coef
    return a * x * x + b * y * y + c * x * y


# ----------------------------------------------------------------------------- reduction
def reduce_fringe_readings(readings: FringeReadings) -> FringeEstimate:
    """Surface estimate, flatness (nm and fringes) and uncertainty from fringe readings.

    Parameters
    ----------
    readings : FringeReadings
        Part size (mm), wavelength (nm) and readings (sags in fringes).

    Returns
    -------
    FringeEstimate

    Raises
    ------
    InputValueError
        No reading, a non-positive size or wavelength, a non-finite sag.

    Examples
    --------
    A quarter-fringe convex bend along x on a 50 mm round part in helium light (sphere assumed):
    the sag is 0.25 x 293.78 nm, and over a circle a sphere's flatness equals its sag.

    >>> r = FringeReadings(587.56, "helium", "circle", 50.0, 50.0, (FringeReading(0.0, 0.25),))
    >>> round(reduce_fringe_readings(r).minimum_zone_nm, 1)
    73.4
    """
    if not readings.readings:
        raise InputValueError("no fringe reading", fix="add at least one [[reading]]")
    if not (readings.wavelength_nm > 0 and readings.length_mm > 0 and readings.width_mm > 0):
        raise InputValueError("the wavelength and the part's size must be positive")
    for r in readings.readings:
        if not math.isfinite(r.sag_fringes):
            raise InputValueError(f"{r.label or 'a reading'}: the bend is not a number", fix="write a number of fringes")
    A, sag, u, owner = _equations(readings)
    model, basis = _model(A)
    coef = _solve(A, sag, u, basis)
    xc, yc = _points(readings.shape, readings.length_mm, readings.width_mm)
    z = _surface(coef, xc, yc)
    mz, ls = _zone_um(xc, yc, z)

    # uncertainty: sensitivity of the minimum zone to each reading's sag. A zone is a maximum of
    # linear functions and has kinks (at a zero sag, or where a twist tips the zone over a corner),
    # where a central difference would give zero; the larger one-sided difference is used instead.
    half = readings.fringe_nm
    step = 0.01 * half
    n = len(readings.readings)
    sens = np.zeros(n)
    for i in range(n):
        d = np.where(owner == i, step, 0.0)
        hi = _zone_um(xc, yc, _surface(_solve(A, sag + d, u, basis), xc, yc))[0]
        lo = _zone_um(xc, yc, _surface(_solve(A, sag - d, u, basis), xc, yc))[0]
        sens[i] = max(abs(hi - mz), abs(mz - lo)) / step
    u_read = np.array([r.u_fringes * half for r in readings.readings])
    budget = [(f"{r.label or f'reading {i + 1}'}: reading limit", float(abs(sens[i]) * u_read[i]))
              for i, r in enumerate(readings.readings)]
    u_flat = readings.flat_flatness_nm / _SQRT3
    if u_flat > 0:
        # the readings see part and flat together; zones obey the triangle inequality, so the flat
        # moves the flatness by at most its own flatness (rectangular, half-width its flatness)
        budget.append(("optical flat (certificate)", float(u_flat)))
    u_total = float(math.sqrt(sum(v * v for _, v in budget)))

    fitted = A @ coef / half
    fitted_by_reading = tuple(float(fitted[np.flatnonzero(owner == i)[0]]) for i in range(n))
    irregular = max((abs(r.irregularity_fringes) for r in readings.readings), default=0.0) * half

    observed, cannot, assumptions, alternatives = _statements(readings, model, coef, xc, yc)
    x0, y0 = readings.length_mm / 2.0, readings.width_mm / 2.0
    return FringeEstimate(
        coefficients_nm_per_mm2=tuple(float(v) for v in coef),
        model=model,
        x_mm=xc + x0,
        y_mm=yc + y0,
        height_nm=z,
        minimum_zone_nm=float(mz),
        least_squares_nm=float(ls),
        standard_uncertainty_nm=u_total,
        expanded_uncertainty_nm=2.0 * u_total,
        uncertainty_budget=tuple(budget),
        irregularity_nm=float(irregular),
        fitted_sag_fringes=fitted_by_reading,
        alternatives=tuple(alternatives),
        observed=tuple(observed),
        cannot_tell=tuple(cannot),
        assumptions=tuple(assumptions),
        wavelength_nm=float(readings.wavelength_nm),
        readings=readings,
    )


def _direction_words(deg) -> str:
    if deg is None:
        return "every direction (circular rings)"
    d = deg % 180.0
    names = {0.0: "x", 90.0: "y", 45.0: "the x=y diagonal", 135.0: "the x=-y diagonal"}
    return f"along {names[d]}" if d in names else f"at {d:g} degrees from x"


def _statements(readings: FringeReadings, model: str, coef, xc, yc):
    """What the readings observe, cannot tell and assume, and the other shapes they allow."""
    a, b, c = coef
    observed = [
        f"sag {_direction_words(r.direction_deg)}: {r.sag_fringes:+g} fringe ({r.kind})" for r in readings.readings
    ]
    cannot = [
        "a bend or ring count gives the sag of each line read, not the shape between: waviness, pits, high spots "
        "and form finer than the fringe spacing are not in it (write them as irregularity, or photograph the fringes)",
        "the sign rests on the stated bow (away from the contact edge: convex; towards it: concave); pressing lightly "
        "on the flat where it touches confirms it (common practice)",
    ]
    if readings.flat_flatness_nm <= 0:
        cannot.append("the optical flat's own error is in every reading and is not in the uncertainty: give its "
                      "certificate's flatness")
    assumptions = []
    alternatives = []
    if model == "sphere":
        assumptions.append("one direction only: the same sag is assumed in every direction (a sphere)")
        cannot.append("one direction cannot tell a sphere from a cylinder or a saddle: read the fringes again with "
                      "the flat turned a quarter turn (and along a diagonal)")
        # the same reading with nothing across it (a cylinder) and with the opposite sag across it (a saddle)
        d = readings.readings[0].direction_deg or 0.0
        t = math.radians(d)
        rot = np.array([[math.cos(t), -math.sin(t)], [math.sin(t), math.cos(t)]])
        k = a  # curvature along the reading
        for name, k_across in (("cylinder", 0.0), ("saddle", -k)):
            # h = k u^2 + k_across v^2 in the reading's own axes (u along it)
            u_ = rot[0, 0] * xc + rot[1, 0] * yc
            v_ = rot[0, 1] * xc + rot[1, 1] * yc
            mz, _ = _zone_um(xc, yc, k * u_ * u_ + k_across * v_ * v_)
            alternatives.append((name, float(mz)))
    elif model == "no twist":
        assumptions.append("no twist is assumed (c = 0 in h = a x^2 + b y^2 + c x y): these directions cannot see it")
        dirs = sorted({round(r.direction_deg % 180.0, 6) for r in readings.readings if r.direction_deg is not None})
        if dirs == [0.0, 90.0]:
            cannot.append("a twist (a saddle along the diagonals) leaves straight fringes along x and along y: read a "
                          "diagonal as well")
        else:
            cannot.append("two directions leave one combination of bend and twist unseen: read a third direction")
    A, sag, u, _ = _equations(readings)
    if A.shape[0] > 3 and model == "full quadratic":
        resid = (sag - A @ np.asarray(coef)) / readings.fringe_nm
        worst = float(np.abs(resid).max())
        assumptions.append(f"more readings than the quadratic needs: fitted by weighted least squares; the readings "
                           f"depart from the fit by up to {worst:.2g} fringe")
    return observed, cannot, assumptions, alternatives
