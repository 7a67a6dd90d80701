"""The one entry to survey reduction: least squares over the observation network, or the Moody worksheet.

The observation model, the datum and rank analysis and the diagnostics both
reductions share live in :mod:`flatcheck.survey._network`, :mod:`flatcheck.survey._rank`
and :mod:`flatcheck.survey._diagnostics`; the classic Union Jack worksheet in
:mod:`flatcheck.survey._moody`.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputValueError
from ._model import Survey
from ._diagnostics import (
    _line_closures,
    _obs_sigma,
    _outlier_warnings,
    _outliers,
    _sigma0,
    _snoop,
    _standardize,
    _weak_lines,
)
from ._network import (
    LinearReduction,
    METHODS,
    Reduction,
    _OPERATOR_MAX_OBS,
    _OPERATOR_MAX_UNKNOWNS,
    _REDUNDANCY_DENSE_MAX,
    blas_one_thread,
    _heightmap,
    _label,
    _linearised_values,
    _zero_records,
)
from ._rank import _plane_removed, _prepare, _solver


def _least_squares(survey: Survey) -> Reduction:
    model, Z, Qp, info = _prepare(survey)
    solver = _solver(model, Z, info)
    n, p = model.n, model.p
    l = model.obs.value_um
    u = solver.solve(l)

    def referred(u):
        # heights without their plane; zeros moved along the datum null space to match
        h_star = u[:n]
        h = _plane_removed(Qp, h_star)
        zeros = u[n:].copy()
        if Z.shape[1]:
            alpha, *_ = np.linalg.lstsq(Z[:n], h - h_star, rcond=None)
            zeros = zeros + Z[n:] @ alpha
        return h, zeros

    h, zeros = referred(u)
    if model.angle_factor is not None:
        # Angle units: the zero is an angle, so it is moved inside the tangent and
        # the linear solve repeated (fixed point; converges like angle**2). The
        # zeros used are those referred to the least-squares plane of the stations.
        for _ in range(4):
            l_new = _linearised_values(model, zeros)
            u = solver.solve(l_new)
            done = np.max(np.abs(l_new - l)) <= 1e-14 * max(1.0, float(np.max(np.abs(l_new))))
            l = l_new
            h, zeros = referred(u)
            if done:
                break
    r = l - model.A @ u
    dof = info.redundancy
    warnings = []
    m = l.size
    if any("traded" in s for s in info.datum):
        warnings.append(
            "the lines run in only two directions, so the level's zero cannot be told from a tilt of the "
            "surface along the bisector of the lines; the zero is reported relative to the least-squares plane"
        )
    # operator and redundancy numbers
    operator = None
    K = None
    n_unk = n + p
    names = tuple(s.name for s in survey.stations)
    if m <= _OPERATOR_MAX_OBS and n_unk <= _REDUNDANCY_DENSE_MAX:
        K = solver.operator()
        G = K[:n] - Qp @ (Qp.T @ K[:n])
        operator = LinearReduction(G, names, "least-squares")
        Ac = model.A.tocoo()  # diag(A N^- A^T W): each reading's row of A against its column of K
        hat = np.bincount(Ac.row, weights=Ac.data * K[Ac.col, Ac.row], minlength=m)
        red = np.clip(1.0 - hat, 0.0, 1.0)
    else:
        if m <= _OPERATOR_MAX_OBS and n_unk <= _OPERATOR_MAX_UNKNOWNS:
            # formed when first read (the Monte Carlo uncertainty): the reduction itself does not need it
            def build_G(solver=solver, Qp=Qp, n=n):
                K = solver.operator()
                return K[:n] - Qp @ (Qp.T @ K[:n])

            operator = LinearReduction(build_G, names, "least-squares")
        red = np.full(m, dof / m if m else 0.0)
        warnings.append(
            "the network is large: standardised residuals use the mean redundancy number, not each reading's own"
        )
    sigma0_um, sigma0_reading = _sigma0(model, r, dof)
    if dof <= 0:
        warnings.append("the readings have no redundancy, so they cannot be checked: add lines or repeat runs")
    sigma_um, apriori = _obs_sigma(model, sigma0_um)
    w_std = _standardize(model, r, red, sigma0_um, sigma_um)
    groups, w_after = _snoop(model, K, r, red, w_std, sigma_um, apriori, dof)
    outliers = _outliers(model, r, w_std, groups, w_after, diagnosed=K is not None)
    warnings += _outlier_warnings(model, outliers, groups, w_std, diagnosed=K is not None)
    if K is not None and dof > 0:
        inst = model.survey.instrument
        s_read = float(inst.reading_uncertainty) if apriori else sigma0_reading
        warnings += _weak_lines(model, red, s_read)
    return Reduction(
        heightmap=_heightmap(survey, h, _label(survey)),
        method="least-squares",
        residual_um=r,
        sigma0_um=sigma0_um,
        sigma0_reading=sigma0_reading,
        ref_base_mm=model.ref_base_mm,
        redundancy=dof,
        closures=_line_closures(model, l, u, r),
        instrument_zeros=_zero_records(model, zeros),
        outliers=outliers,
        warnings=tuple(warnings),
        operator=operator,
        rank=info,
        redundancy_numbers=red,
        standardized_residual=w_std,
        standardized_residual_after=w_after if K is not None else None,
    )


def reduce_survey(survey: Survey, *, method: str = "least-squares") -> Reduction:
    """Reduce a survey's readings to station heights.

    Parameters
    ----------
    survey : Survey
        Stations (mm), lines and readings (every run is used).
    method : {"least-squares", "moody"}
        ``"least-squares"``: network adjustment over every line of any layout
        (see the module notes). ``"moody"``: the classic Union Jack worksheet
        (:func:`flatcheck.moody_reduce`), Union Jack surveys only.

    Returns
    -------
    Reduction
        Heights (µm) referred to the least-squares plane of the stations,
        residuals (µm), sigma0, closures, zeros, outliers, warnings and the
        linear operator.

    Raises
    ------
    UnobservableError
        If the layout cannot observe some shape of the surface beyond its plane
        (e.g. twist on an autocollimator grid), or stations are cut off.
    LayoutError
        ``method="moody"`` on a survey that is not a Union Jack.
    InputValueError
        Unknown method, missing or bad readings.

    Examples
    --------
    A tilted plane read with a level on a grid: nothing is left about the
    least-squares plane.

    >>> from flatcheck.survey import Instrument, plan_grid, simulate_survey
    >>> plan = plan_grid(500, 400, 100, margin_mm=50, instrument=Instrument("level", "um/m"))
    >>> s = simulate_survey(plan, lambda x, y: 1.0 + 0.01 * x - 0.02 * y, instrument_zero=4.0)
    >>> red = reduce_survey(s)
    >>> bool(abs(red.heightmap.height_um).max() < 1e-9)
    True
    """
    if method not in METHODS:
        raise InputValueError(
            f"unknown reduction method {method!r}", fix=f"use one of: {', '.join(METHODS)}"
        )
    if method == "moody":
        from ._moody import moody_reduction

        return moody_reduction(survey)
    with blas_one_thread():  # small dense algebra throughout: one BLAS thread (see blas_one_thread)
        return _least_squares(survey)
