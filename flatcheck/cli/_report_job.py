"""The steps of writing a report (used by ``report`` and ``demo``): checks, evaluation, the PDF."""

from __future__ import annotations

import os
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
    if output.is_dir():
        raise OutputError(f"cannot write {output}: it is a folder", where="-o", fix="give the report's file name")
    if png is not None and png.exists() and not png.is_dir():  # a missing folder is made, as demo --out makes its own
        raise OutputError(f"{png} exists and is not a folder", where="--png", fix="choose a folder for the pictures")
    if png is not None and os.path.abspath(png) == os.path.abspath(output):  # the folder would be made in its place
        raise OutputError(f"{png} is the path of the report itself (-o)", where="--png",
                          fix="give the pictures a folder of their own (e.g. --png pictures)")
    if standard is not None:
        from ..conformance import get_standard

        get_standard(standard)  # an unknown name fails here


#: The pictures --png writes: NN-<picture>.png (see flatcheck.output.write_report).
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
                        u_height_um: float | None, show_progress: bool = True, status: StatusLine | None = None,
                        lab_defaults=None):
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
    from ..bearing import BEARING_TRIALS

    # the first trials' errors are kept for the bearing page's U (flatcheck.bearing._uncertainty)
    mc = dict(trials=trials, seed=seed, u_height_um=u_height_um, lab_defaults=lab_defaults, keep_trials=BEARING_TRIALS)
    try:
        with progress_bar("Monte Carlo", trials, enabled=show_progress) as advance:
            def step(n=1):
                status.stop()  # the bar takes the line over
                advance(n)

            return evaluate_surface(loaded, window=window, monte_carlo=dict(mc, progress=step)), None
    except InputValueError as exc:  # nothing to propagate: say so in the report instead of failing
        return evaluate_surface(loaded, window=window), f"not evaluated: {exc.message}"


def certificate_for_report(db: Path | None, input: Path, *, prefix: str | None, standard: str | None, method: str,
                           trials: int | None, seed: int | None):
    """``report --db``: the certificate of the survey in ``input``, found in the register by the hash of its text.

    Returns ``(certificate, trials, seed)``: the :class:`~flatcheck.records.CertificateData` (its number
    issued now, or the one issued before) or None without ``db``, and the Monte Carlo trials and seed
    to evaluate with: the register's, unless given, so that the report's pages state the certificate's U.

    Raises
    ------
    InputValueError
        ``--prefix`` without ``--db``; ``--standard`` with it (the grades come from the register's limits
        table); a survey that is not in the register; another reduction than the register's.
    RegisterError
        A file that is not a register, or a damaged one (refused unchanged).
    """
    if db is None:
        if prefix is not None:
            raise InputValueError("--prefix numbers a certificate, and certificates come from the register",
                                  where="--prefix", fix="add --db REGISTER, or leave out --prefix")
        return None, trials, seed
    if standard is not None:
        raise InputValueError("with --db the grades come from the register's limits table", where="--standard",
                              fix="leave out --standard; set the grade sought with 'flatcheck register surface IDENT "
                              "--standard ... --grade ...'")
    from ..records import Register, certificate_data, check_prefix, text_sha256

    if prefix is not None:
        prefix = check_prefix(prefix)
    try:
        row_hash = text_sha256(input.read_bytes().decode("utf-8-sig"))
    except (OSError, UnicodeDecodeError):
        row_hash = None  # not text (an X3P file): the register holds no such survey
    with Register.open(db) as reg:  # checked before anything is written; a missing register is named
        row = None if row_hash is None else reg.find_hash(row_hash)
        if row is None:
            raise InputValueError(f"this survey is not in the register {db}", where=str(input),
                                  fix=f"add it first with 'flatcheck register add {input} --db {db}'")
        if row.kind == "survey" and row.method != method:
            raise InputValueError(f"the register holds this survey reduced by the {row.method} method",
                                  where="--method",
                                  fix=f"give --method {row.method} (the report then states the certificate's numbers)")
        if prefix is not None and reg.setting("certificate_prefix") != prefix:
            reg.set_setting("certificate_prefix", prefix)
        detail = reg.survey_detail(row.survey_id)
        cert = certificate_data(reg, row.survey_id, prefix=prefix)
    return cert, detail.trials if trials is None else trials, detail.seed if seed is None else seed


def _with_certificate(content, certificate):
    """The report's content with the certificate's pages; a note on them if the report's numbers differ."""
    import dataclasses

    from ..records import evaluation_note

    note = evaluation_note(certificate, content.flatness.mzpl.fltt_um, content.u_mz_um)
    if note:
        certificate = dataclasses.replace(certificate, notes=certificate.notes + (note,))
    date = content.date if content.date != "not stated" else certificate.measured_on  # a CSV's '# date = ...'
    return dataclasses.replace(content, certificate=certificate, date=date)


def make_report(evaluation, *, output: Path, png: Path | None, units: str, show_progress: bool, certificate=None,
                **analysis):
    """Gather and write the report, with a status line and a progress bar on stderr; returns (content, files).

    The steps between the Monte Carlo bar and the page bar (grades, the air bearing, the lapping plan,
    loading the plotting library) are named on a status line as they run.
    """
    from ..output import analyse, page_titles, write_report

    with StatusLine(show_progress) as status:
        content = analyse(evaluation, progress=status.say, **analysis)
        if certificate is not None:  # report --db: the certificate's pages, from the register
            content = _with_certificate(content, certificate)
        status.say("loading the plotting library")
        from ..output import _plots as plot  # noqa: F401  (the first import takes a second or so: say so)

        status.say("laying out the pages")
        n = len(page_titles(content))
    with progress_bar("drawing pages", n, enabled=show_progress) as advance:
        files = write_report(output, content, units=units, png_dir=png, on_page=lambda: advance(1))
    return content, files


def lapping_from_options(hm, *, target_um, target_grade, lap_diameter_mm, lap_size_mm, rate_um_per_min,
                         rate_um_per_pass, strokes_per_pass, stroke_mm, target_gap_um=None,
                         gap_fraction=None) -> dict:
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
    if target_um is None and target_grade is None and target_gap_um is None:
        if gap_fraction is not None:  # the same words as lap and compare
            from ..lapping import resolve_target

            resolve_target(hm, None, None, None, gap_fraction)
        if lap_given:
            raise InputValueError("lap options without a target", where="--target-um/--target-grade/--target-gap-um",
                                  fix="add --target-um T, --target-grade STANDARD:GRADE or --target-gap-um GAP for "
                                      "the lapping page")
        return {}
    from ..lapping import build_lap, check_lap_on_surface, resolve_target

    # the same targets as lap and compare: a number, a grade, or the limit an air gap allows (issue 15, item 11)
    target, source = resolve_target(hm, target_um, target_grade, target_gap_um, gap_fraction)
    lap, notes = build_lap(hm, lap_diameter_mm, lap_size_mm, rate_um_per_min, rate_um_per_pass, strokes_per_pass,
                           stroke_mm or 0.0)
    # as flatcheck lap: the lap must not cover the whole surface, and its chart cells must be few enough to print
    check_lap_on_surface(hm, lap, lap_option="--lap-size-mm" if lap_size_mm is not None else "--lap-diameter-mm",
                         cell_option=None)
    return dict(target_um=target, target_source=source, lap=lap, lap_notes=tuple(notes),
                lap_rate_assumed=rate_um_per_min is None and rate_um_per_pass is None)


def guard_band_lapping(lapping: dict, ev, why_not, *, target_um, target_grade, target_gap_um, guard_band,
                       units: str) -> dict:
    """The lapping page's target with its ISO 14253-1 guard band, as ``flatcheck lap`` sets it.

    The guard band is the U of the report's own evaluation (the survey's budget), taken as the estimate of the
    survey after lapping; a target from a grade or a gap is aimed below by it, a ``--target-um`` only with
    ``--guard-band``.

    Raises
    ------
    InputValueError
        A guard band as large as the limit, or ``--guard-band budget`` with no U (naming ``--guard-band``).
    """
    from ..lapping import guard_banded, needs_budget_u, parse_guard_band, target_kind

    if not lapping:
        return lapping
    mode = parse_guard_band(guard_band)
    kind = target_kind(target_um, target_grade, target_gap_um)
    u = u_src = None
    if needs_budget_u(kind, mode):
        unc = ev.uncertainty
        if unc is not None:
            mz = unc.minimum_zone
            u = float(mz.expanded_um)
            u_src = (f"U of this survey's uncertainty budget as the estimate of the next survey's (Monte Carlo, "
                     f"JCGM 101:2008, {mz.trials} trials, seed {mz.seed})")
        else:
            u_src = f"U {why_not}" if why_not else None
    tgt = guard_banded(lapping["target_um"], lapping["target_source"], kind, mode, u, u_src)
    return dict(lapping, target_um=tgt.aim_um, target_source=tgt.source_text(units),
                lap_notes=tuple(tgt.notes) + tuple(lapping.get("lap_notes", ())))


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
        "certificate": None if content.certificate is None else content.certificate.number,
        "lapping": None if content.lapping is None else {
            "target_um": content.lapping.removal.target_um,
            "lap": content.lapping.lap.describe(),
            "rate_assumed": content.lap_rate_assumed,
            "total_time": content.lapping.total_time,
            "time_unit": content.lapping.lap.time_unit,
        },
    }
