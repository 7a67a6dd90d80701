"""Reading input files as text, with clear errors for missing, empty or binary files."""

from __future__ import annotations

from pathlib import Path

from ..errors import InputFormatError

__all__ = ["read_text"]


def read_text(path, *, wanted: str = "a TOML survey or a CSV height map") -> str:
    """Read a UTF-8 text file (a leading byte-order mark is accepted).

    ``wanted`` says what kind of file the caller expects, for the fix in messages
    (e.g. "a bearing description (.toml)").

    Raises
    ------
    InputFormatError
        Missing file, a folder, an empty file, a binary file or invalid UTF-8.
    """
    path = Path(path)
    if not path.exists():
        raise InputFormatError("no such file", where=str(path), fix="check the path")
    if path.is_dir():
        raise InputFormatError("this is a folder, not a file", where=str(path), fix="give a file")
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputFormatError(f"cannot read the file ({exc.strerror})", where=str(path), fix="check permissions") from None
    if not data.strip():
        raise InputFormatError("the file is empty", where=str(path), fix=f"give {wanted}")
    if b"\x00" in data[:65536]:
        raise InputFormatError(
            "the file is binary, not text", where=str(path), fix=f"give {wanted}"
        )
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise InputFormatError(
            "the file is not valid UTF-8 text", where=f"{path}, line {line}", fix="save it as UTF-8"
        ) from None
