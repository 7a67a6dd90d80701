"""Atomic output: a failure never leaves a half-written file or destroys an earlier one.

Everything is written to a temporary file in the destination's folder and moved
over the destination with :func:`os.replace`, which is atomic on POSIX and
Windows when both paths are on the same file system. The temporary file's data is
flushed to the disk (:func:`os.fsync`) before the move, and on POSIX the folder
after it, so that a power cut just after the move cannot leave a renamed but
empty file (a file system may write the rename before the data).
"""

from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path

from ..errors import OutputError

__all__ = ["atomic_path", "write_text_atomic", "write_bytes_atomic"]


@contextlib.contextmanager
def atomic_path(path, *, suffix: str | None = None):
    """Yield a temporary path beside ``path``; move it over ``path`` only on success.

    Parameters
    ----------
    path : str or Path
        The final destination.
    suffix : str, optional
        Suffix of the temporary file (matplotlib picks the format from it);
        defaults to the destination's suffix.

    Raises
    ------
    OutputError
        If the folder does not exist or cannot be written.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(
            f"cannot write {path}: folder {folder} does not exist", fix="create the folder or choose another path"
        )
    if path.is_dir():
        raise OutputError(f"cannot write {path}: it is a folder", fix="give a file name")
    if path.exists() and not path.is_file():
        # a device (/dev/null), a named pipe or a socket: replacing it would remove it from its folder
        raise OutputError(f"cannot write {path}: it is not a regular file (a device, named pipe or socket)",
                          fix="give the path of a file")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix or path.suffix, dir=folder)
    except OSError as exc:
        raise OutputError(f"cannot write in {folder}: {exc.strerror}", fix="check the folder's permissions") from exc
    os.close(fd)
    # mkstemp creates the file readable by its owner only; give it the usual permissions (umask applies).
    umask = os.umask(0)
    os.umask(umask)
    with contextlib.suppress(OSError):
        os.chmod(tmp, 0o666 & ~umask)
    try:
        yield Path(tmp)
        _fsync_file(tmp)
        os.replace(tmp, path)
        _fsync_folder(folder)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def _fsync_file(path) -> None:
    """Flush a written file's data and size to the disk before it is renamed."""
    fd = os.open(path, os.O_RDWR | getattr(os, "O_BINARY", 0))
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def _fsync_folder(folder) -> None:
    """Flush a folder's entries (the rename) to the disk; POSIX only (Windows cannot open a folder so)."""
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:  # some file systems (network, FUSE) refuse fsync on a folder; the file itself is flushed
        pass
    finally:
        os.close(fd)


def write_text_atomic(path, text: str) -> None:
    """Write ``text`` (UTF-8) to ``path`` atomically."""
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8")


def write_bytes_atomic(path, data: bytes) -> None:
    """Write ``data`` to ``path`` atomically."""
    with atomic_path(path) as tmp:
        tmp.write_bytes(data)
