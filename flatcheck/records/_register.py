"""The register: one SQLite file holding surfaces, instruments and every survey made of them.

Python's standard :mod:`sqlite3` stores everything in one file, created on first use.

Recognising the file
    See :mod:`flatcheck.records._schema`: the header is read and SQLite's integrity check run
    on a read-only connection before anything else; a file that is not a register, or a
    damaged one, is refused and never opened for writing.

Writing
    A new register is built in a temporary file beside the destination and linked into
    place only when complete. Every change is one transaction (``BEGIN IMMEDIATE`` ...
    ``COMMIT``), rolled back on any error, so a failure leaves the register as it was. The
    rollback journal (``journal_mode = DELETE``, SQLite's default) keeps the register one file.

Schema (version 1)
    ``surfaces``      ident, kind, description, size, material, standard and grade sought,
                      location, owner (customer), calibration interval (months or days)
    ``instruments``   ident, kind, model, serial, calibration interval
    ``calibrations``  an instrument's calibrations: date, due date, certificate, traceability
    ``surveys``       one per survey file: surface, instrument, date, state (as-found / as-left),
                      the file's text (raw readings) and its content hash (unique)
    ``results``       flatness, least-squares flatness, U, u, interval, trials, seed, local
                      flatness, the full ``reduce --json`` document
    ``budget_rows``   the uncertainty budget of each survey
    ``nodes``         station heights of each survey (name, x_mm, y_mm, height_um)
    ``verdicts``      each grade's limit and decision, naming the limits version used
    ``limits_versions`` every limits table the register was given (text and hash)
    ``certificates``  certificate numbers issued (one per survey)
    ``settings``      lab name, certificate prefix
    ``schema_version``

    Indexes serve the two frequent questions: a surface's history
    (``surveys(surface_id, measured_on, id)``) and what is due (the last survey of each
    surface through the same index; the last calibration of each instrument through
    ``calibrations(instrument_id, calibrated_on)``).
"""

from __future__ import annotations

import contextlib
import os
import sqlite3
from pathlib import Path

import numpy as np

from ..errors import FlatcheckError, InputValueError, OutputError
from ._entry import BudgetRow, SurveyEntry
from ._limits import LimitsFile, parse_limits, text_sha256
from ._rows import AddResult, Calibration, InstrumentInfo, SurfaceInfo, SurveyDetail, SurveyRow, Verdict
from ._schema import RegisterError, check_header, create_file, now_utc, ro_uri, verify

__all__ = ["DuplicateSurveyError", "Register", "SIZE_MATCH_MM"]

#: Largest difference (mm) of a side between a file and the register's record of the surface
#: before the file is refused as (probably) another surface. Common practice, no single source.
SIZE_MATCH_MM = 1.0


class DuplicateSurveyError(FlatcheckError, ValueError):
    """The survey is already in the register (same content hash)."""


# ----------------------------------------------------------------------------- the register
class Register:
    """An open register. Use :meth:`open`; close with :meth:`close` or a ``with`` block.

    Every method that changes the register runs one transaction; every reading method
    uses the indexes named in the module docstring.
    """

    def __init__(self, con: sqlite3.Connection, path: Path, readonly: bool):
        self._con = con
        self.path = path
        self.readonly = readonly

    # -- opening and closing
    @classmethod
    def open(cls, path, *, create: bool = False, readonly: bool = False) -> "Register":
        """Open (and with ``create``, make on first use) the register at ``path``.

        Parameters
        ----------
        path : path
            The register file.
        create : bool
            Create a new register when no file exists at ``path``.
        readonly : bool
            Open for reading only (``history``, ``due``, ``export``...).

        Raises
        ------
        RegisterError
            No register at ``path`` (and not ``create``); a file that is not a register; a
            damaged register (SQLite's integrity check fails); a newer schema. The file is
            not changed.
        OutputError
            A new register cannot be created there.
        """
        path = Path(path)
        if not path.exists() and not _link_loop(path):  # a loop of links is refused by check_header, by name
            if not create:
                raise RegisterError(
                    "no register here yet", where=str(path),
                    fix="add a survey with 'flatcheck register add' to create it, or give the register's path "
                    "with --db or FLATCHECK_DB",
                )
            create_file(path)
        check_header(path)
        journal = Path(str(path) + "-journal")
        hot = journal.exists() and journal.stat().st_size > 0
        if hot and readonly:
            raise RegisterError(
                f"an interrupted write left {journal.name} beside the register", where=str(path),
                fix="run a command that writes (e.g. 'flatcheck register surface IDENT') so that SQLite rolls the "
                "interrupted change back, then try again",
            )
        if not hot:
            # check read-only first: a damaged file is refused before any writable connection exists
            try:
                ro = sqlite3.connect(ro_uri(path), uri=True, timeout=30)
            except sqlite3.Error as exc:
                raise RegisterError(f"cannot open the register ({exc})", where=str(path),
                                    fix="check the path and its permissions") from None
            try:
                verify(ro, path)
            finally:
                ro.close()
            if readonly:
                con = sqlite3.connect(ro_uri(path), uri=True, timeout=30, isolation_level=None)
                return cls(con, path, True)
        try:
            con = sqlite3.connect(path, timeout=30, isolation_level=None)
        except sqlite3.Error as exc:
            raise RegisterError(f"cannot open the register ({exc})", where=str(path),
                                fix="check the path and its permissions") from None
        if hot:  # SQLite rolled the interrupted transaction back on opening; check what is left
            try:
                verify(con, path)
            except BaseException:
                con.close()
                raise
        con.execute("PRAGMA foreign_keys = ON")
        return cls(con, path, False)

    def close(self) -> None:
        """Close the connection."""
        self._con.close()

    def __enter__(self) -> "Register":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    @contextlib.contextmanager
    def _transaction(self):
        """One write transaction: committed at the end of the block, rolled back on any error."""
        if self.readonly:  # pragma: no cover - a programming error, not a user's
            raise RuntimeError("register opened read-only")
        try:
            self._con.execute("BEGIN IMMEDIATE")
        except sqlite3.OperationalError as exc:
            raise OutputError(f"cannot write the register ({exc})", where=str(self.path),
                              fix="another program may be writing it; try again") from None
        try:
            yield self._con
        except sqlite3.OperationalError as exc:
            self._con.execute("ROLLBACK")
            raise OutputError(f"cannot write the register ({exc}); nothing was changed", where=str(self.path),
                              fix="check the disk space and permissions, then try again") from None
        except BaseException:
            self._con.execute("ROLLBACK")
            raise
        else:
            try:
                self._con.execute("COMMIT")
            except sqlite3.Error as exc:
                with contextlib.suppress(sqlite3.Error):
                    self._con.execute("ROLLBACK")
                raise OutputError(f"cannot write the register ({exc}); nothing was changed", where=str(self.path),
                                  fix="check the disk space and permissions, then try again") from None

    # -- settings
    def setting(self, key: str) -> str | None:
        """A stored setting (``lab``, ``certificate_prefix``), or None."""
        r = self._con.execute("SELECT value FROM settings WHERE key = ?", (key,)).fetchone()
        return None if r is None else r[0]

    def set_setting(self, key: str, value: str) -> None:
        """Store a setting (one transaction)."""
        with self._transaction() as con:
            con.execute("INSERT INTO settings(key, value) VALUES (?, ?) "
                        "ON CONFLICT(key) DO UPDATE SET value = excluded.value", (key, value))

    # -- surfaces
    _SURFACE_COLS = ("ident", "kind", "description", "length_mm", "width_mm", "material", "standard", "grade",
                     "location", "owner", "interval_months", "interval_days")

    def surface(self, ident: str) -> SurfaceInfo | None:
        """The surface of ``ident``, or None."""
        r = self._con.execute(f"SELECT {', '.join(self._SURFACE_COLS)} FROM surfaces WHERE ident = ?",
                              (ident,)).fetchone()
        return None if r is None else SurfaceInfo(*r)

    def require_surface(self, ident: str) -> SurfaceInfo:
        """The surface of ``ident``; an error naming the idents the register has when there is none."""
        s = self.surface(ident)
        if s is None:
            known = [r[0] for r in self._con.execute("SELECT ident FROM surfaces ORDER BY ident LIMIT 8")]
            have = f" (it has {', '.join(known)}{', ...' if len(known) == 8 else ''})" if known else " (it has none)"
            raise InputValueError(f"the register has no surface {ident!r}{have}", where=str(self.path),
                                  fix="check the ident, or add its surveys with 'flatcheck register add'")
        return s

    def surfaces(self) -> tuple:
        """Every surface, by ident."""
        rows = self._con.execute(f"SELECT {', '.join(self._SURFACE_COLS)} FROM surfaces ORDER BY ident")
        return tuple(SurfaceInfo(*r) for r in rows)

    def set_surface(self, ident: str, **fields) -> tuple[SurfaceInfo, bool]:
        """Add a surface or change some of its fields (one transaction).

        Parameters
        ----------
        ident : str
        **fields
            Any of kind, description, length_mm, width_mm, material, standard, grade, location,
            owner, interval_months, interval_days; None leaves a field as it is. Setting one
            interval clears the other.

        Returns
        -------
        (SurfaceInfo, bool)
            The record as stored and whether it is new.

        Raises
        ------
        InputValueError
            An empty ident, an unknown field, a size or interval that is not positive, both
            intervals at once.
        """
        ident = _ident(ident, "surface")
        unknown = set(fields) - set(self._SURFACE_COLS[1:])
        if unknown:  # pragma: no cover - a programming error
            raise TypeError(f"unknown surface fields {sorted(unknown)}")
        f = {k: v for k, v in fields.items() if v is not None}
        if "interval_months" in f and "interval_days" in f:
            raise InputValueError("give the interval in months or in days, not both",
                                  where="--interval-months/--interval-days", fix="give one of the two")
        for k in ("length_mm", "width_mm"):
            if k in f and not (np.isfinite(f[k]) and f[k] > 0):
                raise InputValueError(f"{k} {f[k]} is not a positive size", where=f"--{k.replace('_', '-')}",
                                      fix="give the size in mm")
        for k in ("interval_months", "interval_days"):
            if k in f and int(f[k]) <= 0:
                raise InputValueError(f"the interval must be at least 1, got {f[k]}", where=f"--{k.replace('_', '-')}",
                                      fix="give a whole number of months or days")
        if "interval_months" in f:
            f["interval_days"] = None
        elif "interval_days" in f:
            f["interval_months"] = None
        now = now_utc()
        with self._transaction() as con:
            exists = con.execute("SELECT 1 FROM surfaces WHERE ident = ?", (ident,)).fetchone() is not None
            if not exists:
                con.execute("INSERT INTO surfaces(ident, created_utc, updated_utc) VALUES (?, ?, ?)", (ident, now, now))
            if f:
                sets = ", ".join(f"{k} = ?" for k in f)
                con.execute(f"UPDATE surfaces SET {sets}, updated_utc = ? WHERE ident = ?", (*f.values(), now, ident))
        return self.surface(ident), not exists

    # -- instruments
    def instrument(self, ident: str) -> InstrumentInfo | None:
        """The instrument of ``ident`` with its calibrations, or None."""
        r = self._con.execute("SELECT id, ident, kind, model, serial, interval_months FROM instruments WHERE ident = ?",
                              (ident,)).fetchone()
        if r is None:
            return None
        cal = self._con.execute(
            "SELECT calibrated_on, due_on, certificate_ref, traceability FROM calibrations "
            "WHERE instrument_id = ? ORDER BY calibrated_on", (r[0],))
        return InstrumentInfo(*r[1:], tuple(Calibration(*c) for c in cal))

    def instruments(self) -> tuple:
        """Every instrument, by ident."""
        ids = [r[0] for r in self._con.execute("SELECT ident FROM instruments ORDER BY ident")]
        return tuple(self.instrument(i) for i in ids)

    def set_instrument(self, ident: str, *, kind=None, model=None, serial=None, interval_months=None,
                       calibration: Calibration | None = None) -> tuple[InstrumentInfo, bool]:
        """Add an instrument or change its fields, and record a calibration (one transaction).

        Raises
        ------
        InputValueError
            An empty ident, an interval below 1, a calibration due on or before its date, a
            second calibration on the same date.
        """
        ident = _ident(ident, "instrument")
        if interval_months is not None and int(interval_months) <= 0:
            raise InputValueError(f"the interval must be at least 1, got {interval_months}",
                                  where="--interval-months", fix="give a whole number of months")
        if calibration is not None and calibration.due_on <= calibration.calibrated_on:
            raise InputValueError(
                f"the due date {calibration.due_on} is not after the calibration date {calibration.calibrated_on}",
                where="--due", fix="give the due date from the calibration certificate (or --interval-months)")
        f = {k: v for k, v in dict(kind=kind, model=model, serial=serial, interval_months=interval_months).items()
             if v is not None}
        now = now_utc()
        with self._transaction() as con:
            row = con.execute("SELECT id FROM instruments WHERE ident = ?", (ident,)).fetchone()
            new = row is None
            if new:
                cur = con.execute("INSERT INTO instruments(ident, created_utc, updated_utc) VALUES (?, ?, ?)",
                                  (ident, now, now))
                iid = cur.lastrowid
            else:
                iid = row[0]
            if f:
                sets = ", ".join(f"{k} = ?" for k in f)
                con.execute(f"UPDATE instruments SET {sets}, updated_utc = ? WHERE id = ?", (*f.values(), now, iid))
            if calibration is not None:
                dup = con.execute("SELECT 1 FROM calibrations WHERE instrument_id = ? AND calibrated_on = ?",
                                  (iid, calibration.calibrated_on)).fetchone()
                if dup:
                    raise InputValueError(
                        f"instrument {ident} already has a calibration dated {calibration.calibrated_on}",
                        where="--calibrated", fix="give the date of the new calibration")
                con.execute(
                    "INSERT INTO calibrations(instrument_id, calibrated_on, due_on, certificate_ref, traceability, "
                    "added_utc) VALUES (?, ?, ?, ?, ?, ?)",
                    (iid, calibration.calibrated_on, calibration.due_on, calibration.certificate_ref,
                     calibration.traceability, now))
        return self.instrument(ident), new

    # -- limits
    def add_limits(self, limits: LimitsFile) -> tuple[int, bool]:
        """Store a limits table as the current version (one transaction); returns ``(id, new)``.

        Giving a version the register already has makes it current again.
        """
        with self._transaction() as con:
            r = con.execute("SELECT id FROM limits_versions WHERE sha256 = ?", (limits.sha256,)).fetchone()
            if r is not None:
                con.execute("INSERT INTO settings(key, value) VALUES ('limits_id', ?) "
                            "ON CONFLICT(key) DO UPDATE SET value = excluded.value", (str(r[0]),))
                return int(r[0]), False
            cur = con.execute("INSERT INTO limits_versions(sha256, source_name, text, added_utc) VALUES (?, ?, ?, ?)",
                              (limits.sha256, limits.source_name, limits.text, now_utc()))
            con.execute("INSERT INTO settings(key, value) VALUES ('limits_id', ?) "
                        "ON CONFLICT(key) DO UPDATE SET value = excluded.value", (str(cur.lastrowid),))
            return int(cur.lastrowid), True

    def limits(self) -> tuple[int, LimitsFile] | None:
        """The current limits table and its version id, or None."""
        v = self.setting("limits_id")
        return None if v is None else (int(v), self.limits_version(int(v)))

    def limits_version(self, limits_id: int) -> LimitsFile:
        """A stored version of the limits table."""
        r = self._con.execute("SELECT text, source_name FROM limits_versions WHERE id = ?", (limits_id,)).fetchone()
        return parse_limits(r[0], source=f"{r[1]} (register limits version {limits_id})")

    # -- surveys
    def find_hash(self, sha: str) -> SurveyRow | None:
        """The survey with this content hash, or None."""
        r = self._con.execute("SELECT id FROM surveys WHERE content_sha256 = ?", (sha,)).fetchone()
        return None if r is None else self.survey_row(int(r[0]))

    def _refuse_duplicate(self, entry: SurveyEntry) -> None:
        old = self.find_hash(entry.content_sha256)
        if old is not None:
            raise DuplicateSurveyError(
                f"this survey is already in the register as survey {old.survey_id} ({old.ident}, {old.measured_on}, "
                f"added from {old.source_name})", where=entry.source_name,
                fix="nothing to add; a survey measured again is a new file with its own readings",
            )

    def add_survey(self, entry: SurveyEntry) -> AddResult:
        """Add one survey with its results, station heights, budget and verdicts (one transaction).

        A surface the register does not know yet is added from the file's ``[surface]`` table.
        The survey is linked to the instrument named by ``entry.instrument_ident`` (which must
        be registered) or, failing that, to the instrument whose ident equals the survey's
        ``[instrument] model`` text. Verdicts are made for every grade of the surface's standard
        in the current limits table when the surface has a standard, a grade sought and a size.

        Raises
        ------
        DuplicateSurveyError
            The same survey (content hash) is already in the register.
        InputValueError
            An unknown instrument ident, or a size that disagrees with the register's surface.
        """
        notes = list(entry.notes)
        with self._transaction() as con:
            self._refuse_duplicate(entry)
            s = self.surface(entry.ident)
            new_surface = s is None
            now = now_utc()
            if new_surface:
                con.execute(
                    "INSERT INTO surfaces(ident, description, length_mm, width_mm, material, created_utc, updated_utc) "
                    "VALUES (?, ?, ?, ?, ?, ?, ?)",
                    (entry.ident, entry.description, entry.length_mm, entry.width_mm, entry.material, now, now))
                s = self.surface(entry.ident)
            else:
                self._check_size(s, entry)
                if s.length_mm is None and entry.length_mm is not None and entry.width_mm is not None:
                    con.execute("UPDATE surfaces SET length_mm = ?, width_mm = ?, updated_utc = ? WHERE ident = ?",
                                (entry.length_mm, entry.width_mm, now, entry.ident))
                    s = self.surface(entry.ident)
            inst_id, inst_ident = None, None
            if entry.instrument_ident:
                r = con.execute("SELECT id, ident FROM instruments WHERE ident = ?", (entry.instrument_ident,)).fetchone()
                if r is None:
                    raise InputValueError(
                        f"the register has no instrument {entry.instrument_ident!r}", where="--instrument",
                        fix=f"add it first with 'flatcheck register instrument {entry.instrument_ident} --kind ...'")
                inst_id, inst_ident = r
            elif entry.instrument_model:
                r = con.execute("SELECT id, ident FROM instruments WHERE ident = ?", (entry.instrument_model,)).fetchone()
                if r is not None:
                    inst_id, inst_ident = r
            sid = con.execute(
                "INSERT INTO surveys(surface_id, instrument_id, measured_on, state, kind, method, content_sha256, "
                "source_name, raw_text, instrument_text, instrument_model, reading_unit, operator, temperature_c, "
                "added_utc) SELECT id, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ? FROM surfaces WHERE ident = ?",
                (inst_id, entry.measured_on, entry.state, entry.kind, entry.method, entry.content_sha256,
                 entry.source_name, entry.raw_text, entry.instrument_text, entry.instrument_model, entry.reading_unit,
                 entry.operator, entry.temperature_c, now, entry.ident)).lastrowid
            lo, hi = entry.interval_um if entry.interval_um is not None else (None, None)
            con.execute(
                "INSERT INTO results VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (sid, entry.flatness_um, entry.least_squares_um, entry.expanded_uncertainty_um,
                 entry.standard_uncertainty_um, lo, hi, entry.trials, entry.seed, entry.uncertainty_note,
                 entry.local_flatness_um, entry.local_window, entry.height_reference, entry.report_json))
            names = entry.names if entry.names is not None else (None,) * entry.x_mm.size
            con.executemany(
                "INSERT INTO nodes VALUES (?, ?, ?, ?, ?, ?)",
                ((sid, k, n, float(x), float(y), float(z))
                 for k, (n, x, y, z) in enumerate(zip(names, entry.x_mm, entry.y_mm, entry.height_um))))
            con.executemany(
                "INSERT INTO budget_rows VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                ((sid, k, b.source, b.quantity, b.value, b.unit, b.distribution, b.basis, b.contribution_um,
                  int(b.default)) for k, b in enumerate(entry.budget)))
            verdicts, vnotes = self._judge(s, entry.flatness_um, entry.expanded_uncertainty_um)
            notes.extend(vnotes)
            if verdicts:
                lid = int(self.setting("limits_id"))
                con.executemany(
                    "INSERT INTO verdicts VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    ((sid, v.standard, v.grade, v.limit_um, v.verdict, v.rule, v.statement, v.how, v.source, lid,
                      int(v.sought)) for v in verdicts))
        if entry.instrument_model and inst_ident is None and not entry.instrument_ident:
            notes.append(f"instrument {entry.instrument_model!r} is not in the register, so its calibration is not "
                         "checked; add it with 'flatcheck register instrument' or give --instrument")
        return AddResult(int(sid), entry.ident, entry.measured_on, entry.state, entry.flatness_um,
                         entry.expanded_uncertainty_um, new_surface, inst_ident, tuple(verdicts), tuple(notes))

    def _check_size(self, s: SurfaceInfo, entry: SurveyEntry) -> None:
        if None in (s.length_mm, s.width_mm, entry.length_mm, entry.width_mm):
            return
        a = sorted((s.length_mm, s.width_mm))
        b = sorted((entry.length_mm, entry.width_mm))
        if abs(a[0] - b[0]) > SIZE_MATCH_MM or abs(a[1] - b[1]) > SIZE_MATCH_MM:
            raise InputValueError(
                f"the register has surface {s.ident} as {s.length_mm:g} x {s.width_mm:g} mm, the file says "
                f"{entry.length_mm:g} x {entry.width_mm:g} mm", where=entry.source_name,
                fix="check the ident in the file (or give --ident); if the register's size is wrong, correct it with "
                f"'flatcheck register surface {s.ident} --length-mm ... --width-mm ...'")

    def judge(self, ident: str, flatness_um: float, expanded_uncertainty_um: float | None) -> tuple[tuple, tuple]:
        """Verdicts of a flatness result for surface ``ident`` with the current limits table.

        Returns ``(verdicts, notes)``: no verdicts (and a note saying why) when the surface has no
        standard or grade sought, no size, or the register has no limits table.
        """
        return self._judge(self.require_surface(ident), flatness_um, expanded_uncertainty_um)

    def _judge(self, s: SurfaceInfo, flatness_um: float, U_um: float | None):
        from .. import decide

        if not (s.standard and s.grade):
            return (), ()
        cur = self.limits()
        if cur is None:
            return (), (f"no verdict: the register has no limits table for {s.standard} (add one with "
                        "'flatcheck register limits FILE')",)
        if s.length_mm is None or s.width_mm is None:
            return (), (f"no verdict: the size of {s.ident} is not known (set it with 'flatcheck register surface')",)
        _, lim = cur
        try:
            table = lim.table(s.standard)
            sought = table.grade_name(s.grade)
        except InputValueError as exc:
            return (), (f"no verdict: {exc.message}",)
        out, notes = [], []
        for g in table.grades:
            try:
                limit = table.limit(g, s.length_mm, s.width_mm)
            except InputValueError as exc:
                if g == sought:
                    notes.append(f"no verdict for the grade sought: {exc.message}")
                continue
            d = decide(flatness_um, limit.limit_um, U_um, rule="iso14253")
            out.append(Verdict(table.standard, g, limit.limit_um, d.verdict, d.rule, d.statement, limit.how,
                               limit.source, g == sought))
        return tuple(out), tuple(notes)

    _ROW_SQL = (
        "SELECT s.id, f.ident, s.measured_on, s.state, s.kind, s.method, s.source_name, r.flatness_um, "
        "r.least_squares_um, r.expanded_uncertainty_um, r.standard_uncertainty_um, i.ident, s.operator, "
        "CASE WHEN s.instrument_id IS NULL THEN NULL ELSE EXISTS (SELECT 1 FROM calibrations c WHERE "
        "c.instrument_id = s.instrument_id AND c.calibrated_on <= s.measured_on AND s.measured_on <= c.due_on) END "
        "FROM surveys s JOIN surfaces f ON f.id = s.surface_id JOIN results r ON r.survey_id = s.id "
        "LEFT JOIN instruments i ON i.id = s.instrument_id "
    )

    def survey_row(self, survey_id: int) -> SurveyRow | None:
        """One survey's row, or None."""
        r = self._con.execute(self._ROW_SQL + "WHERE s.id = ?", (int(survey_id),)).fetchone()
        return None if r is None else _row(r)

    def surveys_of(self, ident: str) -> tuple:
        """The surveys of surface ``ident`` in date order (index ``surveys_by_surface_date``)."""
        rows = self._con.execute(
            self._ROW_SQL + "WHERE s.surface_id = (SELECT id FROM surfaces WHERE ident = ?) "
            "ORDER BY s.measured_on, s.id", (ident,))
        return tuple(_row(r) for r in rows)

    def find_survey(self, ident: str | None, ref: str) -> SurveyRow:
        """A survey named by its number (``12``) or, for surface ``ident``, by its date (``2024-03-11``).

        Raises
        ------
        InputValueError
            No such survey, a survey of another surface, or several surveys on that date.
        """
        ref = str(ref).strip()
        if ref.lstrip("#").isdigit():
            row = self.survey_row(int(ref.lstrip("#")))
            if row is None:
                raise InputValueError(f"the register has no survey {ref}", where=str(self.path),
                                      fix="see the survey numbers with 'flatcheck register history IDENT'")
            if ident is not None and row.ident != ident:
                raise InputValueError(f"survey {ref} is of surface {row.ident}, not {ident}", where=str(self.path),
                                      fix=f"see the surveys of {ident} with 'flatcheck register history {ident}'")
            return row
        if ident is None:
            raise InputValueError(f"{ref!r} is not a survey number", where="survey",
                                  fix="give the survey's number (see 'flatcheck register history IDENT')")
        rows = [r for r in self.surveys_of(ident) if r.measured_on == ref]
        if not rows:
            raise InputValueError(f"surface {ident} has no survey dated {ref!r}", where=str(self.path),
                                  fix=f"see its surveys with 'flatcheck register history {ident}'")
        if len(rows) > 1:
            raise InputValueError(f"surface {ident} has {len(rows)} surveys dated {ref} "
                                  f"(numbers {', '.join(str(r.survey_id) for r in rows)})", where=str(self.path),
                                  fix="give the survey's number instead of its date")
        return rows[0]

    def heights(self, survey_id: int):
        """The station heights of a survey as a :class:`~flatcheck.HeightMap` (µm at mm)."""
        from .. import HeightMap

        rows = self._con.execute("SELECT name, x_mm, y_mm, height_um FROM nodes WHERE survey_id = ? ORDER BY k",
                                 (int(survey_id),)).fetchall()
        names = [r[0] for r in rows]
        arr = np.array([r[1:] for r in rows], dtype=float).reshape(-1, 3)
        s = self._con.execute("SELECT f.length_mm, f.width_mm, f.ident FROM surveys s JOIN surfaces f "
                              "ON f.id = s.surface_id WHERE s.id = ?", (int(survey_id),)).fetchone()
        return HeightMap(arr[:, 0], arr[:, 1], arr[:, 2], names=None if None in names else tuple(names),
                         length_mm=s[0], width_mm=s[1], label=s[2])

    def survey_detail(self, survey_id: int) -> SurveyDetail:
        """Everything held about one survey.

        Raises
        ------
        InputValueError
            No such survey.
        """
        row = self.survey_row(survey_id)
        if row is None:
            raise InputValueError(f"the register has no survey {survey_id}", where=str(self.path),
                                  fix="see the survey numbers with 'flatcheck register history IDENT'")
        r = self._con.execute(
            "SELECT s.raw_text, r.report_json, s.reading_unit, s.instrument_text, s.temperature_c, r.interval_low_um, "
            "r.interval_high_um, r.trials, r.seed, r.uncertainty_note, r.local_flatness_um, r.local_window, "
            "r.height_reference, s.content_sha256 FROM surveys s JOIN results r ON r.survey_id = s.id WHERE s.id = ?",
            (int(survey_id),)).fetchone()
        hm = self.heights(survey_id)
        budget = tuple(BudgetRow(*b[:7], bool(b[7])) for b in self._con.execute(
            "SELECT source, quantity, value, unit, distribution, basis, contribution_um, is_default FROM budget_rows "
            "WHERE survey_id = ? ORDER BY row_no", (int(survey_id),)))
        verdicts = tuple(Verdict(*v[:8], bool(v[8])) for v in self._con.execute(
            "SELECT standard, grade, limit_um, verdict, rule, statement, how, source, sought FROM verdicts "
            "WHERE survey_id = ? ORDER BY limit_um", (int(survey_id),)))
        if text_sha256(r[0]) != r[13]:  # SQLite checks the file's structure, not the text it holds
            raise RegisterError(
                f"the register is damaged: the stored text of survey {survey_id} does not match its content hash",
                where=str(self.path), fix="restore the register from a backup")
        interval = None if r[5] is None else (r[5], r[6])
        return SurveyDetail(row, r[0], r[1], r[2], r[3], r[4], interval, r[7], r[8], r[9], r[10], r[11], r[12],
                            hm.names, hm.x_mm, hm.y_mm, hm.height_um, budget, verdicts, r[13])

    # -- what is due
    def last_surveys(self) -> tuple:
        """``(SurfaceInfo, last survey date or None)`` for every surface (index ``surveys_by_surface_date``)."""
        cols = ", ".join(f"f.{c}" for c in self._SURFACE_COLS)
        rows = self._con.execute(
            f"SELECT {cols}, (SELECT MAX(s.measured_on) FROM surveys s WHERE s.surface_id = f.id) FROM surfaces f "
            "ORDER BY f.ident")
        return tuple((SurfaceInfo(*r[:-1]), r[-1]) for r in rows)

    def last_calibrations(self) -> tuple:
        """``(ident, kind, model, serial, last calibration or None)`` of every instrument."""
        rows = self._con.execute(
            "SELECT i.ident, i.kind, i.model, i.serial, c.calibrated_on, c.due_on, c.certificate_ref, c.traceability "
            "FROM instruments i LEFT JOIN calibrations c ON c.id = (SELECT c2.id FROM calibrations c2 WHERE "
            "c2.instrument_id = i.id ORDER BY c2.calibrated_on DESC LIMIT 1) ORDER BY i.ident")
        return tuple((r[0], r[1], r[2], r[3], None if r[4] is None else Calibration(*r[4:])) for r in rows)

    def uncalibrated_surveys(self) -> tuple:
        """``(survey_id, surface ident, date, instrument ident, reason)`` of every survey made with a
        registered instrument that had no calibration in force on the survey's date.

        A calibration is in force from its date to its due date, both included.
        """
        rows = self._con.execute(
            "SELECT s.id, f.ident, s.measured_on, i.ident, "
            "(SELECT MAX(c.calibrated_on) FROM calibrations c WHERE c.instrument_id = s.instrument_id "
            " AND c.calibrated_on <= s.measured_on) AS cal_on "
            "FROM surveys s JOIN surfaces f ON f.id = s.surface_id JOIN instruments i ON i.id = s.instrument_id "
            "WHERE NOT EXISTS (SELECT 1 FROM calibrations c WHERE c.instrument_id = s.instrument_id "
            " AND c.calibrated_on <= s.measured_on AND s.measured_on <= c.due_on) "
            "ORDER BY s.measured_on, s.id").fetchall()
        out = []
        for sid, ident, date, inst, cal_on in rows:
            if cal_on is None:
                reason = f"no calibration of {inst} on record on or before {date}"
            else:
                due = self._con.execute(
                    "SELECT c.due_on FROM calibrations c JOIN instruments i ON i.id = c.instrument_id "
                    "WHERE i.ident = ? AND c.calibrated_on = ?", (inst, cal_on)).fetchone()[0]
                reason = f"{inst} was due for calibration on {due} (calibrated {cal_on})"
            out.append((sid, ident, date, inst, reason))
        return tuple(out)

    def unlinked_survey_count(self) -> int:
        """Surveys whose instrument is not in the register (their calibration cannot be checked)."""
        return int(self._con.execute("SELECT COUNT(*) FROM surveys WHERE instrument_id IS NULL").fetchone()[0])

    # -- certificates
    def certificate_number(self, survey_id: int, prefix: str, issued_on: str) -> tuple[str, str, bool]:
        """The certificate number of a survey: the one issued before, or the next of ``prefix`` and the year.

        Numbers run ``PREFIX-YYYY-NNNN`` (e.g. ``KY-2026-0001``) per prefix and year of issue; a
        survey keeps its number (one transaction).

        Returns
        -------
        (number, issued_on, new)
        """
        with self._transaction() as con:
            r = con.execute("SELECT number, issued_on FROM certificates WHERE survey_id = ?", (int(survey_id),)).fetchone()
            if r is not None:
                return r[0], r[1], False
            year = int(issued_on[:4])
            seq = con.execute("SELECT COALESCE(MAX(seq), 0) + 1 FROM certificates WHERE prefix = ? AND year = ?",
                              (prefix, year)).fetchone()[0]
            number = f"{prefix}-{year}-{seq:04d}"
            con.execute("INSERT INTO certificates(number, survey_id, prefix, year, seq, issued_on) "
                        "VALUES (?, ?, ?, ?, ?, ?)", (number, int(survey_id), prefix, year, seq, issued_on))
        return number, issued_on, True

    # -- export
    def export_rows(self, table: str, ident: str | None = None) -> list:
        """Rows of an export table (see :mod:`flatcheck.io._export_csv`), of one surface or of all.

        Raises
        ------
        InputValueError
            An unknown table, or an unknown surface.
        """
        import json

        if ident is not None:
            self.require_surface(ident)
        where, args = ("WHERE f.ident = ? ", (ident,)) if ident is not None else ("", ())
        if table == "results":
            rows = self._con.execute(
                "SELECT s.id, f.ident, s.measured_on, s.state, s.kind, s.method, r.flatness_um, "
                "r.expanded_uncertainty_um, r.standard_uncertainty_um, r.least_squares_um, r.local_flatness_um, "
                "r.local_window, r.trials, r.seed, v.standard, v.grade, v.limit_um, v.verdict, i.ident, "
                "CASE WHEN s.instrument_id IS NULL THEN NULL ELSE EXISTS (SELECT 1 FROM calibrations c WHERE "
                "c.instrument_id = s.instrument_id AND c.calibrated_on <= s.measured_on AND s.measured_on <= c.due_on) "
                "END, s.operator, s.temperature_c, s.source_name, s.content_sha256 "
                "FROM surveys s JOIN surfaces f ON f.id = s.surface_id JOIN results r ON r.survey_id = s.id "
                "LEFT JOIN instruments i ON i.id = s.instrument_id "
                "LEFT JOIN verdicts v ON v.survey_id = s.id AND v.sought = 1 "
                f"{where}ORDER BY f.ident, s.measured_on, s.id", args)
            cols = ("survey_id", "ident", "date", "state", "kind", "method", "flatness_um", "expanded_uncertainty_um",
                    "standard_uncertainty_um", "least_squares_um", "local_flatness_um", "local_window", "trials",
                    "seed", "standard", "grade_sought", "tolerance_um", "verdict", "instrument",
                    "instrument_in_calibration", "operator", "temperature_c", "file", "content_sha256")
            out = []
            for r in rows:
                d = dict(zip(cols, r))
                if d["instrument_in_calibration"] is not None:
                    d["instrument_in_calibration"] = bool(d["instrument_in_calibration"])
                out.append(d)
            return out
        if table == "stations":
            rows = self._con.execute(
                "SELECT s.id, f.ident, s.measured_on, s.state, n.name, n.x_mm, n.y_mm, n.height_um "
                "FROM nodes n JOIN surveys s ON s.id = n.survey_id JOIN surfaces f ON f.id = s.surface_id "
                f"{where}ORDER BY f.ident, s.measured_on, s.id, n.k", args)
            cols = ("survey_id", "ident", "date", "state", "station", "x_mm", "y_mm", "height_um")
            return [dict(zip(cols, r)) for r in rows]
        if table == "readings":
            rows = self._con.execute(
                "SELECT s.id, f.ident, s.measured_on, s.reading_unit, r.report_json FROM surveys s "
                "JOIN surfaces f ON f.id = s.surface_id JOIN results r ON r.survey_id = s.id "
                f"{where}ORDER BY f.ident, s.measured_on, s.id", args)
            out = []
            for sid, idt, date, unit, doc in rows:
                for rd in (json.loads(doc).get("residuals") or {}).get("readings", []):
                    out.append({"survey_id": sid, "ident": idt, "date": date, "line": rd["line"], "run": rd["run"],
                                "step": rd["step"], "from_station": rd["from"], "to_station": rd["to"],
                                "reading": rd["reading"], "unit": unit, "residual_um": rd["residual_um"]})
            return out
        raise InputValueError(f"unknown table {table!r}", where="--table", fix="use results, stations or readings")

    def counts(self) -> dict:
        """Number of surfaces, instruments and surveys."""
        q = self._con.execute
        return {"surfaces": q("SELECT COUNT(*) FROM surfaces").fetchone()[0],
                "instruments": q("SELECT COUNT(*) FROM instruments").fetchone()[0],
                "surveys": q("SELECT COUNT(*) FROM surveys").fetchone()[0]}

def _link_loop(path: Path) -> bool:
    """True when ``path`` is a symbolic link that leads back to itself (no file can be found or made there)."""
    import errno

    try:
        os.stat(path)
    except OSError as exc:
        return exc.errno == errno.ELOOP
    return False


def _row(r) -> SurveyRow:
    return SurveyRow(*r[:-1], None if r[-1] is None else bool(r[-1]))


def _ident(ident: str, what: str) -> str:
    s = str(ident).strip()
    if not s:
        raise InputValueError(f"the {what} ident is empty", where="IDENT", fix=f"give the {what}'s serial or asset number")
    return s
