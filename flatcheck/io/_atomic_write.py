"""Atomic output for the records files (X3P, CSV export, history plot).

A file is written to a temporary file in the destination's folder and moved over the
destination with :func:`os.replace` (atomic on POSIX and Windows on one file system), so a
failure never leaves a half-written file and never destroys an earlier one.

This is a private twin of ``flatcheck.io._atomic`` kept while that module was being moved;
its three callers (``_x3p``, ``_export_csv`` and the ``register`` command) can switch to
``flatcheck.io.atomic_path`` with a one-line import change each.
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from ..errors import OutputError

__all__ = ["atomic_target", "write_bytes_atomic"]


@contextlib.contextmanager
def atomic_target(path, *, suffix: str | None = None):
    """Yield a temporary path beside ``path``; move it over ``path`` only when the block succeeds.

    Parameters
    ----------
    path : str or Path
        The final destination.
    suffix : str, optional
        Suffix of the temporary file (matplotlib chooses the format from it); the
        destination's suffix by default.

    Raises
    ------
    OutputError
        The folder does not exist, ``path`` is a folder, or the folder cannot be written.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"cannot write {path}: folder {folder} does not exist",
                          fix="create the folder or choose another path")
    if path.is_dir():
        raise OutputError(f"cannot write {path}: it is a folder", fix="give a file name")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix or path.suffix, dir=folder)
    except OSError as exc:
        raise OutputError(f"cannot write in {folder}: {exc.strerror}", fix="check the folder's permissions") from None
    os.close(fd)
    # mkstemp makes the file readable by its owner only; give it the usual permissions (umask applies)
    umask = os.umask(0)
    os.umask(umask)
    with contextlib.suppress(OSError):
        os.chmod(tmp, 0o666 & ~umask)
    try:
        yield Path(tmp)
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_bytes_atomic(path, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically (see :func:`atomic_target`)."""
    with atomic_target(path) as tmp:
        try:
            tmp.write_bytes(data)
        except OSError as exc:
            raise OutputError(f"cannot write {path}: {exc.strerror}", fix="check the disk and the folder") from None
