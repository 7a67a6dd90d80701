"""The register's file: its schema, how it is recognised, checked and created.

A register carries ``PRAGMA application_id`` = :data:`APPLICATION_ID` (ASCII "FCRG") and
``PRAGMA user_version`` = :data:`SCHEMA_VERSION` in its header, and the same version in its
``schema_version`` table. Before anything else flatcheck reads the file's first 100 bytes
itself (the SQLite header: magic string at offset 0, user_version at 60, application_id at
68, big-endian; SQLite file format documentation, section 1.3), then opens it **read-only**
and runs ``PRAGMA integrity_check``. A file that is not SQLite, an SQLite database of another
program, a register of a newer schema or a damaged file is refused with a one-line error and
is never opened for writing, so its bytes stay as they were. An empty file is refused too:
flatcheck creates a register only where no file exists, in a temporary file linked into
place when complete.

References
----------
.. [1] SQLite, "Database File Format", section 1.3 "The Database Header"
       (https://www.sqlite.org/fileformat.html), and "PRAGMA integrity_check"
       (https://www.sqlite.org/pragma.html).
"""

from __future__ import annotations

import contextlib
import os
import sqlite3
import stat
import tempfile
from datetime import UTC, datetime
from pathlib import Path

from ..errors import FlatcheckError, OutputError
from ._entry import STATES

__all__ = [
    "APPLICATION_ID",
    "SCHEMA_VERSION",
    "DEFAULT_DB_NAME",
    "DB_ENV",
    "RegisterError",
    "register_path",
    "check_header",
    "verify",
    "create_file",
    "ro_uri",
    "now_utc",
]

#: ``PRAGMA application_id`` of a register: the ASCII bytes "FCRG" (flatcheck register).
APPLICATION_ID = 0x46435247
#: ``PRAGMA user_version`` and ``schema_version.version`` of the schema this code writes.
SCHEMA_VERSION = 1
#: Name of the register in the current folder when neither ``--db`` nor :data:`DB_ENV` is given.
DEFAULT_DB_NAME = "flatcheck-register.sqlite"
#: Environment variable naming the register.
DB_ENV = "FLATCHECK_DB"

_SQLITE_MAGIC = b"SQLite format 3\x00"  # SQLite file format, section 1.3: the header string


_SCHEMA = f"""
PRAGMA application_id = {APPLICATION_ID};
PRAGMA user_version = {SCHEMA_VERSION};
CREATE TABLE schema_version (
    version     INTEGER NOT NULL,
    applied_utc TEXT NOT NULL,
    software    TEXT NOT NULL
);
CREATE TABLE settings (
    key   TEXT PRIMARY KEY,
    value TEXT NOT NULL
);
CREATE TABLE surfaces (
    id              INTEGER PRIMARY KEY,
    ident           TEXT NOT NULL UNIQUE,
    kind            TEXT NOT NULL DEFAULT '',
    description     TEXT NOT NULL DEFAULT '',
    length_mm       REAL CHECK (length_mm IS NULL OR length_mm > 0),
    width_mm        REAL CHECK (width_mm IS NULL OR width_mm > 0),
    material        TEXT NOT NULL DEFAULT '',
    standard        TEXT NOT NULL DEFAULT '',
    grade           TEXT NOT NULL DEFAULT '',
    location        TEXT NOT NULL DEFAULT '',
    owner           TEXT NOT NULL DEFAULT '',
    interval_months INTEGER CHECK (interval_months IS NULL OR interval_months > 0),
    interval_days   INTEGER CHECK (interval_days IS NULL OR interval_days > 0),
    created_utc     TEXT NOT NULL,
    updated_utc     TEXT NOT NULL
);
CREATE TABLE instruments (
    id              INTEGER PRIMARY KEY,
    ident           TEXT NOT NULL UNIQUE,
    kind            TEXT NOT NULL DEFAULT '',
    model           TEXT NOT NULL DEFAULT '',
    serial          TEXT NOT NULL DEFAULT '',
    interval_months INTEGER CHECK (interval_months IS NULL OR interval_months > 0),
    created_utc     TEXT NOT NULL,
    updated_utc     TEXT NOT NULL
);
CREATE TABLE calibrations (
    id              INTEGER PRIMARY KEY,
    instrument_id   INTEGER NOT NULL REFERENCES instruments(id),
    calibrated_on   TEXT NOT NULL,
    due_on          TEXT NOT NULL,
    certificate_ref TEXT NOT NULL DEFAULT '',
    traceability    TEXT NOT NULL DEFAULT '',
    added_utc       TEXT NOT NULL,
    CHECK (due_on > calibrated_on),
    UNIQUE (instrument_id, calibrated_on)
);
CREATE TABLE limits_versions (
    id          INTEGER PRIMARY KEY,
    sha256      TEXT NOT NULL UNIQUE,
    source_name TEXT NOT NULL,
    text        TEXT NOT NULL,
    added_utc   TEXT NOT NULL
);
CREATE TABLE surveys (
    id              INTEGER PRIMARY KEY,
    surface_id      INTEGER NOT NULL REFERENCES surfaces(id),
    instrument_id   INTEGER REFERENCES instruments(id),
    measured_on     TEXT NOT NULL,
    state           TEXT NOT NULL CHECK (state IN ({", ".join(repr(x) for x in STATES)})),
    kind            TEXT NOT NULL CHECK (kind IN ('survey', 'height-map')),
    method          TEXT NOT NULL,
    content_sha256  TEXT NOT NULL UNIQUE,
    source_name     TEXT NOT NULL,
    raw_text        TEXT NOT NULL,
    instrument_text TEXT NOT NULL DEFAULT '',
    instrument_model TEXT NOT NULL DEFAULT '',
    reading_unit    TEXT NOT NULL DEFAULT '',
    operator        TEXT NOT NULL DEFAULT '',
    temperature_c   REAL,
    added_utc       TEXT NOT NULL
);
CREATE TABLE results (
    survey_id               INTEGER PRIMARY KEY REFERENCES surveys(id),
    flatness_um             REAL NOT NULL,
    least_squares_um        REAL NOT NULL,
    expanded_uncertainty_um REAL,
    standard_uncertainty_um REAL,
    interval_low_um         REAL,
    interval_high_um        REAL,
    trials                  INTEGER,
    seed                    INTEGER,
    uncertainty_note        TEXT NOT NULL DEFAULT '',
    local_flatness_um       REAL,
    local_window            TEXT NOT NULL DEFAULT '',
    height_reference        TEXT NOT NULL,
    report_json             TEXT NOT NULL
);
CREATE TABLE budget_rows (
    survey_id       INTEGER NOT NULL REFERENCES surveys(id),
    row_no          INTEGER NOT NULL,
    source          TEXT NOT NULL,
    quantity        TEXT NOT NULL,
    value           REAL NOT NULL,
    unit            TEXT NOT NULL,
    distribution    TEXT NOT NULL,
    basis           TEXT NOT NULL,
    contribution_um REAL,
    is_default      INTEGER NOT NULL,
    PRIMARY KEY (survey_id, row_no)
) WITHOUT ROWID;
CREATE TABLE nodes (
    survey_id INTEGER NOT NULL REFERENCES surveys(id),
    k         INTEGER NOT NULL,
    name      TEXT,
    x_mm      REAL NOT NULL,
    y_mm      REAL NOT NULL,
    height_um REAL NOT NULL,
    PRIMARY KEY (survey_id, k)
) WITHOUT ROWID;
CREATE TABLE verdicts (
    survey_id  INTEGER NOT NULL REFERENCES surveys(id),
    standard   TEXT NOT NULL,
    grade      TEXT NOT NULL,
    limit_um   REAL NOT NULL,
    verdict    TEXT NOT NULL,
    rule       TEXT NOT NULL,
    statement  TEXT NOT NULL,
    how        TEXT NOT NULL,
    source     TEXT NOT NULL,
    limits_id  INTEGER NOT NULL REFERENCES limits_versions(id),
    sought     INTEGER NOT NULL,
    PRIMARY KEY (survey_id, standard, grade)
);
CREATE TABLE certificates (
    id        INTEGER PRIMARY KEY,
    number    TEXT NOT NULL UNIQUE,
    survey_id INTEGER NOT NULL UNIQUE REFERENCES surveys(id),
    prefix    TEXT NOT NULL,
    year      INTEGER NOT NULL,
    seq       INTEGER NOT NULL,
    issued_on TEXT NOT NULL,
    UNIQUE (prefix, year, seq)
);
CREATE INDEX surveys_by_surface_date ON surveys(surface_id, measured_on, id);
CREATE INDEX surveys_by_instrument_date ON surveys(instrument_id, measured_on);
CREATE INDEX calibrations_by_instrument ON calibrations(instrument_id, calibrated_on);
"""


class RegisterError(FlatcheckError, ValueError):
    """The register file cannot be used: not a register, damaged, or of a newer schema."""


def now_utc() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")


def register_path(db: str | os.PathLike | None = None, *, env: dict | None = None) -> Path:
    """Where the register is: ``db`` if given, else ``$FLATCHECK_DB``, else ``./flatcheck-register.sqlite``.

    Parameters
    ----------
    db : path, optional
        The ``--db`` option.
    env : dict, optional
        Environment to read (``os.environ`` by default).
    """
    env = os.environ if env is None else env
    if db is not None and str(db) != "":
        return Path(db)
    if env.get(DB_ENV):
        return Path(env[DB_ENV])
    return Path(DEFAULT_DB_NAME)


def check_header(path: Path) -> tuple[int, int]:
    """Read the SQLite header of ``path`` without SQLite; refuse what is not a register.

    Returns ``(application_id, user_version)``.
    """
    where = str(path)
    if path.is_dir():
        raise RegisterError("this is a folder, not a register file", where=where,
                            fix="give a file name for --db (e.g. lab/flatcheck-register.sqlite)")
    try:
        mode = os.stat(path).st_mode
        if not stat.S_ISREG(mode):  # a FIFO or a device would block or never end: refused unread
            kind = ("a named pipe (FIFO)" if stat.S_ISFIFO(mode) else "a device"
                    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode) else "not a regular file")
            raise RegisterError(f"this is {kind}, not a register file", where=where,
                                fix="give the register's file with --db (or FLATCHECK_DB)")
        with open(path, "rb") as fh:
            head = fh.read(100)
    except OSError as exc:
        raise RegisterError(f"cannot read the register ({exc.strerror})", where=where,
                            fix="check the path and its permissions") from None
    if not head:
        raise RegisterError("the file is empty, so it is not a register", where=where,
                            fix="remove the empty file or give another --db; flatcheck creates a register only "
                            "where no file exists")
    if head[:16] != _SQLITE_MAGIC:
        raise RegisterError("not a register: the file is not an SQLite database", where=where,
                            fix="give the register's path with --db (or FLATCHECK_DB)")
    if len(head) < 100:
        raise RegisterError("the register is damaged: its header is cut short", where=where,
                            fix="restore the register from a backup")
    app_id = int.from_bytes(head[68:72], "big")  # SQLite file format 1.3: application ID at offset 68
    user_version = int.from_bytes(head[60:64], "big")  # SQLite file format 1.3: user version at offset 60
    if app_id != APPLICATION_ID:
        what = "another program's SQLite database" if app_id else "an SQLite database that is not a flatcheck register"
        raise RegisterError(f"not a register: {what} (application_id {app_id:#010x})", where=where,
                            fix="give the register's path with --db, or a new file name to start a register")
    if user_version > SCHEMA_VERSION:
        raise RegisterError(
            f"the register was written by a newer flatcheck (schema {user_version}; this one knows {SCHEMA_VERSION})",
            where=where, fix="use the newer flatcheck with this register")
    if user_version < 1:
        raise RegisterError("the register is damaged: its schema version is missing", where=where,
                            fix="restore the register from a backup")
    return app_id, user_version


def ro_uri(path: Path) -> str:
    return path.resolve().as_uri() + "?mode=ro"


def verify(con: sqlite3.Connection, path: Path) -> None:
    """Run SQLite's own integrity check and the schema-version check on an open connection."""
    where = str(path)
    try:
        rows = con.execute("PRAGMA integrity_check").fetchall()
        if [r[0] for r in rows] != ["ok"]:
            first = " ".join(str(rows[0][0]).split())
            raise RegisterError(f"the register is damaged (SQLite integrity check: {first})", where=where,
                                fix="restore the register from a backup; the file was left as it is")
        v = con.execute("SELECT MAX(version) FROM schema_version").fetchone()[0]
    except sqlite3.DatabaseError as exc:
        raise RegisterError(f"the register is damaged ({' '.join(str(exc).split())})", where=where,
                            fix="restore the register from a backup; the file was left as it is") from None
    if v != SCHEMA_VERSION:
        raise RegisterError(f"the register's schema table says version {v}, its header {SCHEMA_VERSION}", where=where,
                            fix="restore the register from a backup")


def create_file(path: Path) -> None:
    """Build an empty register in a temporary file and link it into place (never over an existing file)."""
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"cannot create the register {path}: folder {folder} does not exist",
                          fix="create the folder or give another --db")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".new", dir=folder)
    except OSError as exc:
        raise OutputError(f"cannot create the register in {folder}: {exc.strerror}",
                          fix="check the folder's permissions or give another --db") from None
    os.close(fd)
    umask = os.umask(0)
    os.umask(umask)
    with contextlib.suppress(OSError):
        os.chmod(tmp, 0o666 & ~umask)
    try:
        con = sqlite3.connect(tmp)
        try:
            con.executescript(_SCHEMA)
            con.execute("INSERT INTO schema_version VALUES (?, ?, ?)", (SCHEMA_VERSION, now_utc(), _software()))
            con.commit()
        finally:
            con.close()
        try:
            os.link(tmp, path)  # fails if the path exists: never replaces a file
        except FileExistsError:
            pass  # made meanwhile by another process: it is checked like any existing file
        except OSError:  # a file system without hard links
            if not path.exists():
                os.replace(tmp, path)
    except sqlite3.Error as exc:
        raise OutputError(f"cannot create the register: {exc}", where=str(path), fix="check the disk") from None
    finally:
        with contextlib.suppress(OSError):
            os.unlink(tmp)


def _software() -> str:
    from .. import __version__

    return f"flatcheck {__version__}"
