"""Guided entry of readings into a planned survey: a pure state machine.

The order of the readings is the order of the survey file: line by line, run by run, and
each run's readings in the order the file lists them (a ``reverse`` run lists them from
the line's last step back to its first, as walked). An :class:`EntryPlan` lists every
planned reading as a :class:`Slot` (which line, run and step, where the instrument stands);
an :class:`EntryState` holds the readings entered so far. Functions return new states and
never print, read or write: the command line renders and saves.

Every reading is checked as it comes (:func:`check_reading`):

- **runs differ**: a reading far from the previous run of the same line at the same step,
  after the two runs' mean difference (a zero that moved) once two pairs show it; the limit
  is ``z sqrt(2) sigma`` with ``sigma`` one reading's standard deviation;
- **jump**: the surface would bend, between this step and the next one along the run, by
  more than the whole flatness tolerance of the coarsest DIN 876 grade (3) for a surface
  of this length: a single kink that large cannot come from a surface plate of this size
  (a height second difference ``e`` forces a flatness of at least ``e/2``);
- **closure**: the reading completes the first run of a line, and the line's closure with
  the lines already read exceeds its limit (see :mod:`flatcheck.bench._closure`).

Readings no survey gives at all (the file reader's plausibility limits: a slope beyond
20 mm/m, a height beyond 10 m) are refused with :class:`ReadingRefused`, since the file
could not be read back with them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputValueError
from ..units import angle_unit, length_unit, rise_um

__all__ = [
    "DEFAULT_READING_SD_URAD",
    "DEFAULT_READING_SD_UM",
    "FLAG_Z",
    "MAX_CLOSURE_UNKNOWNS",
    "PlannedRun",
    "Slot",
    "EntryPlan",
    "EntryState",
    "EntryLimits",
    "Finding",
    "ReadingRefused",
    "plan_entry",
    "start_entry",
    "entry_limits",
    "check_reading",
    "enter_reading",
    "correct_reading",
    "undo_reading",
    "run_readings",
]

#: One reading's standard deviation assumed for the checks when the file states none, as an angle:
#: 1.5 µrad (0.31 arcsec), about the repeatability of a good autocollimator or electronic level read
#: by hand. Common practice, no single source; state ``reading_uncertainty`` in the file to change it.
DEFAULT_READING_SD_URAD = 1.5
#: The same for an indicator, µm (a 0.001 mm dial or an electronic probe). Common practice, no single source.
DEFAULT_READING_SD_UM = 0.3
#: Flag limit in standard deviations: the two-sided 0.1 % point of the standard normal distribution,
#: the limit the reduction uses for its residuals (flatcheck.OUTLIER_THRESHOLD, after Baarda 1968).
FLAG_Z = 3.29
#: Closure checks solve the network of the lines read so far (a dense eigen-decomposition, cubic in the
#: unknowns); above this many unknowns (stations plus instrument zeros) they would hold up entry for
#: seconds at every line, so they are left to the reduction at the end, which checks every reading.
MAX_CLOSURE_UNKNOWNS = 600
#: The coarsest grade of DIN 876 (3: c = 40 µm in t = c (1 + L/1000)), whose tolerance bounds the "jump"
#: check; DIN 876-1 (as published for the cast-iron edition, secondary source).
_JUMP_GRADE = "3"


class ReadingRefused(InputValueError):
    """A reading that cannot be entered: not a number, or beyond the plausibility limits of a survey."""


@dataclass(frozen=True)
class PlannedRun:
    """One run of the plan.

    Attributes
    ----------
    line : str
        The line's name.
    line_index : int
        Index of the line in ``survey.lines``.
    run : int
        0-based number of the run among the line's runs.
    n_runs : int
        Runs of this line.
    order : {"forward", "reverse"}
        Walking order as written in the file.
    sign : int
        +1, or -1 when readings are negated (``flip_sign``, or the file's ``positive`` says
        readings fall toward the line's end), so that ``sign * reading`` rises toward the end.
    n_readings : int
        Readings of the run: steps (slope instruments) or stations (indicators).
    first : int
        Number (1-based, over the survey) of the run's first reading.
    where : str
        Where the run's readings are in the file, for messages.
    """

    line: str
    line_index: int
    run: int
    n_runs: int
    order: str
    sign: int
    n_readings: int
    first: int
    where: str = ""

    @property
    def label(self) -> str:
        """``"run 2 of 2 (reverse)"``."""
        return f"run {self.run + 1} of {self.n_runs} ({self.order})"


@dataclass(frozen=True)
class Slot:
    """One planned reading.

    Attributes
    ----------
    number : int
        1-based number over the survey, in entry order.
    run_index : int
        Index of its run in ``EntryPlan.runs``.
    index : int
        0-based position in the run's readings as the file lists them.
    line : str
        The line's name.
    step : int
        0-based step along the line from its first station (slope instruments: from station
        ``step`` to ``step + 1``); for an indicator the station's number along the line.
    stations : tuple of str
        Where the instrument stands, in walking order: its two feet (rear, front) for a
        slope instrument, the station read for an indicator.
    distances_mm : tuple of float
        Distances of those stations from the line's first station, mm.
    foot_spacing_mm : float
        Base of the step, mm (0 for an indicator).
    """

    number: int
    run_index: int
    index: int
    line: str
    step: int
    stations: tuple
    distances_mm: tuple
    foot_spacing_mm: float


@dataclass(frozen=True)
class EntryPlan:
    """Every planned reading of a survey in entry order.

    Attributes
    ----------
    survey : flatcheck.Survey
        Stations, lines and instrument (runs are not used).
    runs : tuple of PlannedRun
    slots : tuple of Slot
        ``slots[n - 1]`` is reading number ``n``.
    """

    survey: object
    runs: tuple
    slots: tuple

    @property
    def unit(self) -> str:
        """The reading unit (the file's ``[instrument] unit``)."""
        return self.survey.instrument.unit

    def slot_of(self, run_index: int, step: int) -> Slot:
        """The slot of run ``run_index`` that reads step (or station) ``step``."""
        r = self.runs[run_index]
        i = r.n_readings - 1 - step if r.order == "reverse" else step
        return self.slots[r.first - 1 + i]


@dataclass(frozen=True)
class EntryState:
    """The readings entered so far.

    Attributes
    ----------
    plan : EntryPlan
    values : tuple of (float or None)
        One per slot: the reading in the instrument's unit, or None when not yet read.
    history : tuple of int
        Numbers of the readings entered in this session, latest last (what undo takes back).
    """

    plan: EntryPlan
    values: tuple
    history: tuple = ()

    @property
    def next_slot(self) -> Slot | None:
        """The first reading not yet read, or None when the survey is complete."""
        for slot, v in zip(self.plan.slots, self.values):
            if v is None:
                return slot
        return None

    @property
    def n_done(self) -> int:
        """Readings entered."""
        return sum(v is not None for v in self.values)

    @property
    def n_total(self) -> int:
        """Readings planned."""
        return len(self.values)

    @property
    def complete(self) -> bool:
        """True when every planned reading is in."""
        return all(v is not None for v in self.values)

    def value(self, number: int):
        """Reading number ``number`` (1-based), or None."""
        return self.values[number - 1]


@dataclass(frozen=True)
class EntryLimits:
    """What the checks compare against.

    Attributes
    ----------
    reading_sd : float
        One reading's standard deviation in the instrument's unit.
    reading_sd_basis : str
        Where it comes from: ``"stated"`` (the file's ``reading_uncertainty``), ``"given"``
        (by the caller) or ``"default"`` (:data:`DEFAULT_READING_SD_URAD` / ``_UM``).
    jump_um : float
        Largest bend (height second difference) between successive steps, µm.
    z : float
        Limit in standard deviations for the run and closure checks.
    closure_checks : bool
        False when the survey is too large for closure checks during entry (more than
        :data:`MAX_CLOSURE_UNKNOWNS` unknowns); the reduction still checks every reading.
    """

    reading_sd: float
    reading_sd_basis: str
    jump_um: float
    z: float = FLAG_Z
    closure_checks: bool = True


@dataclass(frozen=True)
class Finding:
    """A suspect reading, named as it is entered.

    Attributes
    ----------
    kind : {"runs-differ", "jump", "closure"}
    number : int
        The reading's number.
    message : str
        One sentence saying what is suspect, with the numbers.
    value : float
        The measure compared (reading unit for "runs-differ", µm otherwise), in size.
    limit : float
        Its limit, same unit.
    """

    kind: str
    number: int
    message: str
    value: float
    limit: float


def _g(v: float) -> str:
    return f"{v:.4g}"


def plan_entry(survey, runs, *, falls: bool = False) -> EntryPlan:
    """The entry order of a planned survey.

    Parameters
    ----------
    survey : flatcheck.Survey
        Stations, lines and instrument (from the planned file; runs are not used).
    runs : sequence of (str, str, bool, str)
        Every run in file order: ``(line name, order, flip_sign, where)``; objects with the
        attributes ``line``, ``order``, ``flip_sign`` and ``where`` are accepted too.
    falls : bool
        The file's ``positive`` key negates every reading (``"falls-toward-line-end"``,
        ``"height-down"``).

    Returns
    -------
    EntryPlan

    Raises
    ------
    InputValueError
        A run names a line that is not in the survey, or has an unknown order.
    """
    heights = survey.instrument.reads_heights
    by_name = {ln.name: i for i, ln in enumerate(survey.lines)}
    pos = {s.name: (s.x_mm, s.y_mm) for s in survey.stations}
    specs = []
    for r in runs:
        if hasattr(r, "line"):
            specs.append((r.line, r.order, bool(r.flip_sign), getattr(r, "where", "")))
        else:
            specs.append(tuple(r) + ("",) * (4 - len(r)))
    counts: dict = {}
    for name, *_ in specs:
        counts[name] = counts.get(name, 0) + 1
    seen: dict = {}
    out_runs, slots = [], []
    for name, order, flip, where in specs:
        if name not in by_name:
            raise InputValueError(f"run of unknown line {name!r}", where=where or None, fix="use the survey's line names")
        if order not in ("forward", "reverse"):
            raise InputValueError(f"order is {order!r}", where=where or None, fix="use forward or reverse")
        li = by_name[name]
        ln = survey.lines[li]
        k = seen.get(name, 0)
        seen[name] = k + 1
        n = len(ln.stations) if heights else ln.steps
        sign = -1 if (bool(flip) != bool(falls)) else 1
        run = PlannedRun(name, li, k, counts[name], order, sign, n, len(slots) + 1, where)
        ri = len(out_runs)
        out_runs.append(run)
        x0, y0 = pos[ln.stations[0]]
        dist = [math.hypot(pos[s][0] - x0, pos[s][1] - y0) for s in ln.stations]
        for i in range(n):
            step = n - 1 - i if order == "reverse" else i
            if heights:
                st, dd = (ln.stations[step],), (dist[step],)
                base = 0.0
            else:
                a, b = step, step + 1
                if order == "reverse":
                    a, b = b, a
                st, dd = (ln.stations[a], ln.stations[b]), (dist[a], dist[b])
                base = float(ln.foot_spacing_mm)
            slots.append(Slot(len(slots) + 1, ri, i, name, step, st, dd, base))
    return EntryPlan(survey, tuple(out_runs), tuple(slots))


def start_entry(plan: EntryPlan, readings) -> EntryState:
    """The state of a survey whose runs already hold ``readings``.

    Parameters
    ----------
    plan : EntryPlan
    readings : sequence of sequence of float
        One sequence per run of ``plan.runs``: the readings already written, in file order
        (a run may be partly read: its first readings).

    Returns
    -------
    EntryState
        Entry resumes at the first missing reading (:attr:`EntryState.next_slot`).

    Raises
    ------
    InputValueError
        A run with more readings than planned, or a number of runs that does not match.
    """
    readings = list(readings)
    if len(readings) != len(plan.runs):
        raise InputValueError(f"{len(readings)} runs of readings for {len(plan.runs)} planned runs",
                              fix="give one sequence per run")
    values: list = [None] * len(plan.slots)
    for run, vals in zip(plan.runs, readings):
        vals = [float(v) for v in vals]
        if len(vals) > run.n_readings:
            raise InputValueError(
                f"line {run.line!r} {run.label} has {len(vals)} readings but needs {run.n_readings}",
                where=run.where or None, fix=f"keep at most {run.n_readings} readings in the run",
            )
        for i, v in enumerate(vals):
            values[run.first - 1 + i] = v
    return EntryState(plan, tuple(values), ())


def run_readings(state: EntryState) -> tuple:
    """The readings of every run as the file lists them (each run's read prefix), for saving.

    Returns
    -------
    tuple of tuple of float
        One per run of ``state.plan.runs``; a run stops at its first missing reading.
    """
    out = []
    for run in state.plan.runs:
        vals = []
        for i in range(run.n_readings):
            v = state.values[run.first - 1 + i]
            if v is None:
                break
            vals.append(v)
        out.append(tuple(vals))
    return tuple(out)


def entry_limits(plan: EntryPlan, *, reading_sd: float | None = None) -> EntryLimits:
    """The limits of the checks for a survey.

    Parameters
    ----------
    plan : EntryPlan
    reading_sd : float, optional
        One reading's standard deviation in the instrument's unit. By default the file's
        ``reading_uncertainty``, else :data:`DEFAULT_READING_SD_URAD` (slope instruments;
        doubled in the reading for an autocollimator that reports beam deviation) or
        :data:`DEFAULT_READING_SD_UM` (indicators).

    Returns
    -------
    EntryLimits

    Raises
    ------
    InputValueError
        ``reading_sd`` not a positive finite number.
    """
    from flatcheck.conformance import din876_tolerance_um

    inst = plan.survey.instrument
    if reading_sd is not None:
        sd = float(reading_sd)
        if not (math.isfinite(sd) and sd > 0):
            raise InputValueError(f"the reading standard deviation {reading_sd!r} is not a positive number",
                                  where="reading_sd", fix="give a positive number in the instrument's unit")
        basis = "given"
    elif inst.reading_uncertainty:
        sd, basis = float(inst.reading_uncertainty), "stated"
    elif inst.reads_heights:
        sd, basis = DEFAULT_READING_SD_UM / length_unit(inst.unit).factor_um, "default"
    else:
        gain = 2.0 if (inst.kind == "autocollimator" and inst.reports == "beam-deviation") else 1.0
        sd, basis = DEFAULT_READING_SD_URAD * 1e-6 / angle_unit(inst.unit).factor * gain, "default"
    surf = plan.survey.surface
    jump = din876_tolerance_um(_JUMP_GRADE, max(surf.length_mm, surf.width_mm))
    zeros = 2 * len(plan.survey.lines) if inst.kind == "autocollimator" else 1
    longest = max(len(ln.stations) for ln in plan.survey.lines)
    small = len(plan.survey.stations) + longest + zeros <= MAX_CLOSURE_UNKNOWNS
    return EntryLimits(sd, basis, float(jump), FLAG_Z, small)


# ---------------------------------------------------------------------------
# entering, correcting, undoing


def _refuse(state: EntryState, slot: Slot, value) -> float:
    """The reading as a float, or :class:`ReadingRefused`."""
    import flatcheck.survey as fsv

    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ReadingRefused(f"{value!r} is not a number", fix="give the reading as a number") from None
    if not math.isfinite(v):
        raise ReadingRefused(f"{value!r} is not a finite number", fix="give the reading as read")
    run = state.plan.runs[slot.run_index]
    line = state.plan.survey.lines[run.line_index]
    vals = []
    for i in range(run.n_readings):
        x = v if i == slot.index else state.values[run.first - 1 + i]
        if x is None:
            if i > slot.index:
                break
            continue
        vals.append(x)
    try:
        fsv.check_plausible_readings(line, vals, state.plan.survey.instrument)
    except InputValueError as exc:
        raise ReadingRefused(
            f"reading {slot.number} ({_slot_words(state.plan, slot)}): {exc.message}", fix=exc.fix
        ) from None
    return v


def enter_reading(state: EntryState, value) -> EntryState:
    """Enter ``value`` as the next reading.

    Raises
    ------
    ReadingRefused
        Not a finite number, or beyond the survey file's plausibility limits.
    InputValueError
        The survey is complete.
    """
    slot = state.next_slot
    if slot is None:
        raise InputValueError("every planned reading is already in", fix="nothing more to enter")
    v = _refuse(state, slot, value)
    values = list(state.values)
    values[slot.number - 1] = v
    return EntryState(state.plan, tuple(values), state.history + (slot.number,))


def correct_reading(state: EntryState, number: int, value) -> EntryState:
    """Replace reading ``number`` (1-based, already entered) by ``value``.

    Raises
    ------
    InputValueError
        No such reading, or it has not been entered yet.
    ReadingRefused
        As :func:`enter_reading`.
    """
    if not 1 <= int(number) <= state.n_total:
        raise InputValueError(f"there is no reading {number}", fix=f"give a number from 1 to {state.n_total}")
    slot = state.plan.slots[int(number) - 1]
    if state.values[slot.number - 1] is None:
        raise InputValueError(f"reading {number} has not been entered yet", fix="enter it in turn")
    v = _refuse(state, slot, value)
    values = list(state.values)
    values[slot.number - 1] = v
    return EntryState(state.plan, tuple(values), state.history)


def undo_reading(state: EntryState):
    """Take back the last reading entered.

    The last reading entered in this session; with none, the reading just before the next
    missing one (the last one saved in the file before a restart).

    Returns
    -------
    (EntryState, Slot or None)
        The new state and the slot cleared (None: nothing to undo).
    """
    history = list(state.history)
    number = None
    while history:
        n = history.pop()
        if state.values[n - 1] is not None:
            number = n
            break
    if number is None:
        nxt = state.next_slot
        last = (nxt.number - 1) if nxt is not None else state.n_total
        if last >= 1 and state.values[last - 1] is not None:
            number = last
    if number is None:
        return state, None
    slot = state.plan.slots[number - 1]
    run = state.plan.runs[slot.run_index]
    # a run is written as the prefix of its readings: only its last one can go
    for i in range(slot.index + 1, run.n_readings):
        if state.values[run.first - 1 + i] is not None:
            return state, None
    values = list(state.values)
    values[number - 1] = None
    return EntryState(state.plan, tuple(values), tuple(history)), slot


# ---------------------------------------------------------------------------
# checks


def _slot_words(plan: EntryPlan, slot: Slot) -> str:
    run = plan.runs[slot.run_index]
    what = "station" if plan.survey.instrument.reads_heights else "step"
    n = run.n_readings
    # steps are numbered from the line's first station, as the reduction names them; a reverse
    # run meets them from the last one, so its own count is added
    back = f" (reading {slot.index + 1} of this run)" if run.order == "reverse" else ""
    return f"line {slot.line!r}, {run.label}, {what} {slot.step + 1} of {n}{back}"


def _fwd(plan: EntryPlan, slot: Slot, v: float) -> float:
    return plan.runs[slot.run_index].sign * v


def _check_runs(state: EntryState, slot: Slot, v: float, limits: EntryLimits, unit: str):
    plan = state.plan
    run = plan.runs[slot.run_index]
    others = [i for i, r in enumerate(plan.runs) if r.line == run.line and i != slot.run_index]
    earlier = [i for i in others if i < slot.run_index]
    later = [i for i in others if i > slot.run_index]
    prev = None
    for i in list(reversed(earlier)) + later:
        ps = plan.slot_of(i, slot.step)
        if state.values[ps.number - 1] is not None:
            prev = (i, ps)
            break
    if prev is None:
        return None
    pi, ps = prev
    pv = state.values[ps.number - 1]
    diffs = []
    for step in range(run.n_readings):
        if step == slot.step:
            continue
        a = state.values[plan.slot_of(slot.run_index, step).number - 1]
        b_slot = plan.slot_of(pi, step)
        b = state.values[b_slot.number - 1]
        if a is not None and b is not None:
            diffs.append(_fwd(plan, plan.slot_of(slot.run_index, step), a) - _fwd(plan, b_slot, b))
    same_sign = plan.runs[pi].sign == run.sign
    if len(diffs) >= 2:
        offset = float(np.median(diffs))
        inflate = math.sqrt(1.0 + math.pi / (2.0 * len(diffs)))  # the median's own scatter
    elif same_sign:
        offset, inflate = 0.0, 1.0
    else:
        return None  # a turned run's zero is unknown until two readings show it
    d = _fwd(plan, slot, v) - _fwd(plan, ps, pv) - offset
    limit = limits.z * math.sqrt(2.0) * limits.reading_sd * inflate
    if abs(d) <= limit:
        return None
    other = plan.runs[pi]
    after = " after the runs' mean difference" if offset != 0.0 or len(diffs) >= 2 else ""
    turned = "" if same_sign else " (the runs read with opposite signs: compared with its sign reversed)"
    basis = {"stated": "the file's reading_uncertainty", "given": "as given", "default": "default"}[limits.reading_sd_basis]
    msg = (
        f"{_g(v)} {unit} differs by {_g(abs(d))} {unit} from run {other.run + 1} at this step "
        f"({_g(pv)} {unit}){after}{turned}: more than the {_g(limit)} {unit} that a reading uncertainty of "
        f"{_g(limits.reading_sd)} {unit} ({basis}) allows"
    )
    return Finding("runs-differ", slot.number, msg, abs(d), limit)


def _check_jump(state: EntryState, slot: Slot, v: float, limits: EntryLimits, unit: str):
    plan = state.plan
    inst = plan.survey.instrument
    run = plan.runs[slot.run_index]

    def val(i):
        if i == slot.index:
            return v
        if 0 <= i < run.n_readings:
            return state.values[run.first - 1 + i]
        return None

    L = max(plan.survey.surface.length_mm, plan.survey.surface.width_mm)
    worst = None
    if inst.reads_heights:
        f = length_unit(inst.unit).factor_um
        for c in (slot.index - 1, slot.index, slot.index + 1):
            trio = [val(c - 1), val(c), val(c + 1)]
            if any(t is None for t in trio):
                continue
            bend = abs(trio[0] - 2.0 * trio[1] + trio[2]) * f
            if worst is None or bend > worst[0]:
                worst = (bend, None)
        if worst is None or worst[0] <= limits.jump_um:
            return None
        msg = (
            f"{_g(v)} {unit} bends the line by {_g(worst[0])} µm over two station spacings, more than the whole "
            f"flatness tolerance of the coarsest DIN 876 grade (3) for a surface {L:.0f} mm long ({_g(limits.jump_um)} µm)"
        )
        return Finding("jump", slot.number, msg, worst[0], limits.jump_um)
    au = angle_unit(inst.unit)
    half = 0.5 if (inst.kind == "autocollimator" and inst.reports == "beam-deviation") else 1.0
    base = slot.foot_spacing_mm
    for n in (slot.index - 1, slot.index + 1):
        w = val(n)
        if w is None:
            continue
        bend = abs(float(rise_um(v * half, base, au)) - float(rise_um(w * half, base, au)))
        if worst is None or bend > worst[0]:
            worst = (bend, w)
    if worst is None or worst[0] <= limits.jump_um:
        return None
    msg = (
        f"{_g(v)} {unit} next to {_g(worst[1])} {unit}: the surface would bend by {_g(worst[0])} µm within one "
        f"{base:.4g} mm step, more than the whole flatness tolerance of the coarsest DIN 876 grade (3) for a "
        f"surface {L:.0f} mm long ({_g(limits.jump_um)} µm)"
    )
    return Finding("jump", slot.number, msg, worst[0], limits.jump_um)


def _forward_run(state: EntryState, run_index: int, override=None) -> np.ndarray | None:
    """A complete run's readings in forward order with its sign, or None if incomplete."""
    plan = state.plan
    run = plan.runs[run_index]
    vals = []
    for step in range(run.n_readings):
        s = plan.slot_of(run_index, step)
        v = override[1] if (override is not None and s.number == override[0]) else state.values[s.number - 1]
        if v is None:
            return None
        vals.append(run.sign * v)
    return np.asarray(vals, dtype=float)


def _check_closure(state: EntryState, slot: Slot, v: float, limits: EntryLimits):
    from ._closure import line_closure

    if not limits.closure_checks:
        return None
    plan = state.plan
    run = plan.runs[slot.run_index]
    new = _forward_run(state, slot.run_index, override=(slot.number, v))
    if new is None:
        return None
    for i, r in enumerate(plan.runs):
        if r.line == run.line and i != slot.run_index and _forward_run(state, i) is not None:
            return None  # the line already has a complete run: the run check covers it
    done = []
    for i, r in enumerate(plan.runs):
        if r.line == run.line:
            continue
        f = _forward_run(state, i)
        if f is not None:
            done.append((r.line_index, f, r.sign))
    if not done:
        return None
    inst = plan.survey.instrument
    if inst.reads_heights:
        kw = {"reading_sd_um": limits.reading_sd * length_unit(inst.unit).factor_um}
    else:
        half = 0.5 if (inst.kind == "autocollimator" and inst.reports == "beam-deviation") else 1.0
        kw = {"reading_sd_rad": limits.reading_sd * angle_unit(inst.unit).factor * half}
    res = line_closure(plan.survey, done, (run.line_index, new, run.sign), z=limits.z, **kw)
    if not res.flagged:
        return None
    msg = (
        f"line {run.line!r} does not close with the lines already read: closure {res.closure_um:+.3g} µm at "
        f"{res.station}, where the reading uncertainty allows ±{res.limit_um:.2g} µm (a slip in this line, or in "
        "one it meets there)"
    )
    return Finding("closure", slot.number, msg, abs(res.closure_um), res.limit_um)


def check_reading(state: EntryState, value, limits: EntryLimits, *, number: int | None = None) -> tuple:
    """Check a reading before it is entered (or a correction of reading ``number``).

    Parameters
    ----------
    state : EntryState
    value : float
        The reading in the instrument's unit.
    limits : EntryLimits
    number : int, optional
        The reading it would replace; by default the next one.

    Returns
    -------
    tuple of Finding
        Empty when nothing is suspect.

    Raises
    ------
    ReadingRefused
        A reading that cannot be entered at all (see :func:`enter_reading`).
    """
    slot = state.next_slot if number is None else state.plan.slots[int(number) - 1]
    if slot is None:
        return ()
    v = _refuse(state, slot, value)
    unit = state.plan.unit
    out = []
    for f in (_check_runs(state, slot, v, limits, unit), _check_jump(state, slot, v, limits, unit),
              _check_closure(state, slot, v, limits)):
        if f is not None:
            out.append(f)
    return tuple(out)
