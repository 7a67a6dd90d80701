"""The steps of writing a report (used by ``report`` and ``demo``): checks, evaluation, the PDF."""

from __future__ import annotations

import re
import sys
from pathlib import Path


from ..errors import InputValueError, OutputError
from .common import progress_bar, stderr_console


class StatusLine:
    """A one-line status on standard error ("reading the survey…") for the steps that have no bar.

    Shown only when ``enabled`` and standard error is a terminal, like the progress bars; ``stop()``
    clears it (a progress bar cannot be shown while it is). Use as a context manager.
    """

    def __init__(self, enabled: bool = True):
        self.enabled = bool(enabled) and sys.stderr.isatty()
        self._status = None

    def say(self, text: str) -> None:
        """Show ``text`` as the step now running."""
        if not self.enabled:
            return
        if self._status is None:
            self._status = stderr_console().status(f"{text}…", spinner="line")
            self._status.start()
        else:
            self._status.update(f"{text}…")

    def stop(self) -> None:
        """Clear the line (before a progress bar starts, and at the end)."""
        if self._status is not None:
            self._status.stop()
            self._status = None

    def __enter__(self) -> "StatusLine":
        return self

    def __exit__(self, *exc) -> bool:
        self.stop()
        return False


def carriage_from_options(bearing: Path | None, pad: str | None, gap_um: float | None):
    """The carriage (and its limits) asked for by --bearing or --pad/--gap-um, or ``None``."""
    if bearing is None and pad is None and gap_um is None:
        return None, None, None, None
    from ..bearing import carriage_from_options as from_options
    from ..io import read_bearing_toml

    return from_options(None if bearing is None else read_bearing_toml(bearing), pad=pad, gap_um=gap_um,
                        kind="porous", y_mm=None, travel_start_mm=None, travel_end_mm=None, step_mm=None)


def check_outputs(output: Path, png: Path | None = None, standard: str | None = None) -> None:
    """Refuse a bad PDF name, a missing folder or an unknown standard before any work is done."""
    if output.suffix.lower() != ".pdf":
        raise OutputError(f"{output} does not end in .pdf", where="-o", fix="name the report file *.pdf")
    folder = output.parent if str(output.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"cannot write {output}: folder {folder} does not exist", where="-o",
                          fix="create the folder or choose another path")
    if png is not None and not png.is_dir():
        raise OutputError(f"{png} is not an existing folder", where="--png", fix="create the folder first")
    if standard is not None:
        from ..conformance import get_standard

        get_standard(standard)  # an unknown name fails here


#: The pictures --png writes: NN-<picture>.png (see flatcheck.report.write_report).
_PICTURE_NAME = re.compile(r"^\d\d-[a-z0-9-]+\.png$")


def refuse_pictures_over_inputs(png: Path | None, inputs) -> None:
    """Refuse a --png folder holding an input whose name is one the pictures take (they would replace it)."""
    if png is None:
        return
    for inp in inputs:
        if inp is None:
            continue
        inp = Path(inp)
        try:
            same_folder = inp.resolve().parent == png.resolve()
        except OSError:
            continue
        if same_folder and _PICTURE_NAME.match(inp.name):
            raise OutputError(f"{inp} is an input file and has the name of a picture the report writes there",
                              where="--png", fix="choose another folder for --png")


def evaluate_for_report(loaded, *, window: str, uncertainty: bool, trials: int, seed: int | None,
                        u_height_um: float | None, show_progress: bool = True, status: StatusLine | None = None):
    """The shared evaluation, with Monte Carlo uncertainty when it can be had.

    Returns ``(evaluation, why_not)``: ``why_not`` says why there is no uncertainty (or is None).
    A height map without ``u_height_um`` has none. A survey with nothing to propagate (no stated
    reading uncertainty and no redundancy) is reported without one, and the report says why.
    """
    from ..evaluation import evaluate_surface, parse_window

    if str(window).strip().lower() != "auto":
        parse_window(window)  # a bad window fails here, so the only input error below is the uncertainty's
    status = status or StatusLine(False)
    status.say("evaluating the surface (flatness, lines, local flatness)")
    if not uncertainty:
        return evaluate_surface(loaded, window=window), "not evaluated (--no-uncertainty)"
    if loaded.survey is None and u_height_um is None:
        return evaluate_surface(loaded, window=window), (
            "not evaluated: a height map carries no reading uncertainty (give --u-height-um)")
    mc = dict(trials=trials, seed=seed, u_height_um=u_height_um)
    try:
        with progress_bar("Monte Carlo", trials, enabled=show_progress) as advance:
            def step(n=1):
                status.stop()  # the bar takes the line over
                advance(n)

            return evaluate_surface(loaded, window=window, monte_carlo=dict(mc, progress=step)), None
    except InputValueError as exc:  # nothing to propagate: say so in the report instead of failing
        return evaluate_surface(loaded, window=window), f"not evaluated: {exc.message}"


def make_report(evaluation, *, output: Path, png: Path | None, units: str, show_progress: bool, **analysis):
    """Gather and write the report, with a status line and a progress bar on stderr; returns (content, files).

    The steps between the Monte Carlo bar and the page bar (grades, the air bearing, the lapping plan,
    loading the plotting library) are named on a status line as they run.
    """
    from ..output import analyse, page_titles, write_report

    with StatusLine(show_progress) as status:
        content = analyse(evaluation, progress=status.say, **analysis)
        status.say("loading the plotting library")
        from ..output import _plots as plot  # noqa: F401  (the first import takes a second or so: say so)

        status.say("laying out the pages")
        n = len(page_titles(content))
    with progress_bar("drawing pages", n, enabled=show_progress) as advance:
        files = write_report(output, content, units=units, png_dir=png, on_page=lambda: advance(1))
    return content, files


def lapping_from_options(hm, *, target_um, target_grade, lap_diameter_mm, lap_size_mm, rate_um_per_min,
                         rate_um_per_pass, strokes_per_pass, stroke_mm) -> dict:
    """Target, lap and notes of the lapping page, parsed and checked as ``flatcheck lap`` does (empty: no page).

    The lap's numbers are checked by :func:`~flatcheck.cli.lap_cmd.build_lap`; ``report_cmd`` also
    checks them before reading the input (:func:`~flatcheck.cli.lap_cmd.check_lap_options`).

    Raises
    ------
    InputValueError
        Naming the option: lap options without a target, a bad number, or a lap more than twice the
        size of the surveyed area (it would cover everything wherever it stood).
    """
    lap_given = any(v is not None for v in (lap_diameter_mm, lap_size_mm, rate_um_per_min, rate_um_per_pass,
                                            strokes_per_pass)) or stroke_mm
    if target_um is None and target_grade is None:
        if lap_given:
            raise InputValueError("lap options without a target", where="--target-um/--target-grade",
                                  fix="add --target-um T or --target-grade STANDARD:GRADE for the lapping page")
        return {}
    from ..lapping import build_lap, check_lap_on_surface, resolve_target

    target, source = resolve_target(hm, target_um, target_grade)
    lap, notes = build_lap(hm, lap_diameter_mm, lap_size_mm, rate_um_per_min, rate_um_per_pass, strokes_per_pass,
                           stroke_mm or 0.0)
    # as flatcheck lap: the lap must not cover the whole surface, and its chart cells must be few enough to print
    check_lap_on_surface(hm, lap, lap_option="--lap-size-mm" if lap_size_mm is not None else "--lap-diameter-mm",
                         cell_option=None)
    return dict(target_um=target, target_source=source, lap=lap, lap_notes=tuple(notes),
                lap_rate_assumed=rate_um_per_min is None and rate_um_per_pass is None)


def report_json(content, files, input_path) -> dict:
    """The JSON object of ``flatcheck report --json`` (heights µm, positions mm)."""
    from ..output import uncertainty_text

    unc = content.uncertainty
    lf = content.local
    return {
        "command": "report",
        "input": str(input_path),
        "pdf": str(files.pdf),
        "pages": files.pages,
        "png": [str(p) for p in files.pngs],
        "flatness_mz_um": content.flatness.mzpl.fltt_um,
        "flatness_ls_um": content.flatness.lspl.fltt_um,
        "u_mz_um": content.u_mz_um,
        "u_ls_um": content.u_ls_um,
        "monte_carlo": None if unc is None else {"trials": unc.minimum_zone.trials, "seed": unc.minimum_zone.seed},
        "uncertainty_note": uncertainty_text(content, "um"),
        "local_flatness": None if lf is None else {
            "window": content.window.text, "max_um": lf.worst_um, "x_mm": lf.worst_x_mm, "y_mm": lf.worst_y_mm,
        },
        "lines": [{"name": ln.name, "straightness_um": ln.straightness_um, "closure_um": ln.closure_um}
                  for ln in content.lines],
        "grades": [{"grade": g.grade, "tolerance_um": g.tolerance_um, "verdict": g.verdict} for g in content.grades],
        "bearing_verdict": None if content.bearing is None else content.bearing.verdict,
        "lapping": None if content.lapping is None else {
            "target_um": content.lapping.removal.target_um,
            "lap": content.lapping.lap.describe(),
            "rate_assumed": content.lap_rate_assumed,
            "total_time": content.lapping.total_time,
            "time_unit": content.lapping.lap.time_unit,
        },
    }
