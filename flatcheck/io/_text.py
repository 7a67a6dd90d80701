"""Reading input files as text, with clear errors for missing, empty, binary, special or oversized files.

Only regular files are read (a device such as ``/dev/zero``, a FIFO or a socket would never end or block
forever), and at most :data:`MAX_TEXT_BYTES`. :func:`parse_toml` parses TOML text with the same care: a
document nested deeper than any flatcheck file, or holding an integer too large for a float, is refused with
the key it was found at instead of failing inside the program.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

from ..errors import InputFormatError, InputValueError

__all__ = ["read_text", "parse_toml", "toml_loads", "open_regular", "wide_encoding", "MAX_TEXT_BYTES", "MAX_TOML_DEPTH"]

#: Largest input file read (bytes): 256 MiB holds a height map of about eight million points at 32 bytes a
#: row, beyond the largest surface flatcheck evaluates (docs/limits.md); a larger file is refused unread.
MAX_TEXT_BYTES = 256 * 1024 * 1024

#: Longest line of a TOML file (characters): a survey's longest line holds one line's readings, some kilobytes;
#: a longer line is refused before parsing (the TOML parser reads long strings a character at a time).
MAX_TOML_LINE = 1 << 20

#: Deepest nesting of arrays and tables accepted in a TOML file. flatcheck's files nest three deep
#: ([[carriage.pad]] inside a document); 32 leaves room for any layout and keeps the parser's recursion bounded.
MAX_TOML_DEPTH = 32


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
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise InputFormatError("no such file", where=str(path), fix="check the path") from None
    except OSError as exc:
        raise InputFormatError(f"cannot read the file ({exc.strerror or exc})", where=str(path),
                               fix="check the path and permissions") from None
    if stat.S_ISDIR(mode):
        raise InputFormatError("this is a folder, not a file", where=str(path), fix="give a file")
    if not stat.S_ISREG(mode):
        kind = ("a named pipe (FIFO)" if stat.S_ISFIFO(mode) else "a device" if stat.S_ISCHR(mode) or stat.S_ISBLK(mode)
                else "a socket" if stat.S_ISSOCK(mode) else "not a regular file")
        raise InputFormatError(f"this is {kind}, not a regular file: it is not read, because it may never end",
                               where=str(path), fix=f"save {wanted} to a file and give that")
    try:
        # O_NONBLOCK: should the path be swapped for a FIFO after the check above, opening it does not block
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
        with os.fdopen(fd, "rb") as fh:
            if not stat.S_ISREG(os.fstat(fh.fileno()).st_mode):
                raise InputFormatError("this is not a regular file: it is not read", where=str(path),
                                       fix=f"save {wanted} to a file and give that")
            data = fh.read(MAX_TEXT_BYTES + 1)
    except OSError as exc:
        raise InputFormatError(f"cannot read the file ({exc.strerror})", where=str(path), fix="check permissions") from None
    if len(data) > MAX_TEXT_BYTES:
        raise InputFormatError(
            f"the file is larger than {MAX_TEXT_BYTES // (1024 * 1024)} MiB, more than any surface flatcheck "
            "evaluates (docs/limits.md)", where=str(path), fix=f"give {wanted}, or thin the data first")
    if not data.strip():
        raise InputFormatError("the file is empty", where=str(path), fix=f"give {wanted}")
    wide = wide_encoding(data)
    if wide:
        raise InputFormatError(f"the file is {wide} text, not UTF-8", where=str(path),
                               fix=f"save it as UTF-8 (most editors offer the encoding under 'Save as'); give {wanted}")
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


def wide_encoding(data: bytes) -> str | None:
    """``"UTF-16"`` or ``"UTF-32"`` when ``data`` looks like text in that encoding (a byte-order mark, or a zero
    byte beside every character of plain text), else None; such a file is refused with its encoding named
    rather than as "binary"."""
    if data.startswith((b"\xff\xfe\x00\x00", b"\x00\x00\xfe\xff")):
        return "UTF-32"
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "UTF-16"
    head = data[:4096]
    if len(head) >= 8 and b"\x00" in head:
        n = len(head) // 4 * 4
        if all(head[i + 1:i + 4] == b"\x00\x00\x00" and 0 < head[i] < 127 for i in range(0, min(n, 64), 4)) or \
                all(head[i:i + 3] == b"\x00\x00\x00" and 0 < head[i + 3] < 127 for i in range(0, min(n, 64), 4)):
            return "UTF-32"
        odd, even = head[1::2], head[0::2]

        def plain(b: bytes) -> bool:  # mostly printable ASCII or line ends: the other half of UTF-16 text
            return sum(1 for c in b if 32 <= c < 127 or c in (9, 10, 13)) > 0.9 * len(b)

        if (odd.count(0) > 0.9 * len(odd) and plain(even)) or (even.count(0) > 0.9 * len(even) and plain(odd)):
            return "UTF-16"
    return None


def toml_loads(text: str, *, where: str):
    """:func:`tomllib.loads` that refuses what no flatcheck file holds (readers keep their own syntax messages).

    Raises
    ------
    tomllib.TOMLDecodeError
        As :func:`tomllib.loads` (the caller words the syntax error).
    InputFormatError
        Nested deeper than :data:`MAX_TOML_DEPTH` (a thousands-deep array would exhaust Python's stack).
    InputValueError
        An integer too large for a float, with its key and line.
    """
    import tomllib

    if len(text) > MAX_TOML_LINE:  # tomllib reads a long string a character at a time: 50 MB take many seconds
        for no, line in enumerate(text.split("\n"), start=1):
            if len(line) > MAX_TOML_LINE:
                raise InputFormatError(
                    f"line {no} is {len(line)} characters long, more than any line of a flatcheck file "
                    f"({MAX_TOML_LINE} at most, docs/limits.md)", where=f"{where}, line {no}",
                    fix="break the line up, or check that this is the file meant")
    deep = InputFormatError(f"arrays or tables are nested more than {MAX_TOML_DEPTH} levels deep", where=where,
                            fix="flatcheck's files nest at most three levels; see docs/survey-format.md")
    try:
        doc = tomllib.loads(text)
    except RecursionError:  # the parser recurses once per level: thousands of levels exhaust Python's stack
        raise deep from None
    _refuse_huge_integers(doc, where, text, deep)
    return doc


def parse_toml(text: str, *, where: str):
    """Parse TOML text; refuse nesting deeper than :data:`MAX_TOML_DEPTH` and integers no float can hold.

    Parameters
    ----------
    text : str
        The file's text.
    where : str
        The file, for messages.

    Returns
    -------
    dict
        As :func:`tomllib.loads` gives it.

    Raises
    ------
    InputFormatError
        Not TOML (with the parser's line and column), or nested too deep.
    InputValueError
        An integer too large to be converted to a float (names its key).
    tomllib.TOMLDecodeError
        Never: decoding errors are turned into InputFormatError.
    """
    import tomllib

    try:
        return toml_loads(text, where=where)
    except tomllib.TOMLDecodeError as exc:
        raise InputFormatError(f"not valid TOML: {exc}", where=where, fix="check the file's syntax") from None


def _refuse_huge_integers(doc, where: str, text: str, deep: Exception) -> None:
    """Walk the parsed document (without recursion): refuse an integer beyond the range of a float, and nesting
    deeper than :data:`MAX_TOML_DEPTH`."""
    stack = [((), doc)]
    while stack:
        keys, node = stack.pop()
        if len(keys) > MAX_TOML_DEPTH:
            raise deep
        if isinstance(node, dict):
            stack.extend(((*keys, str(k)), v) for k, v in node.items())
        elif isinstance(node, list):
            # a table of an array of tables is named by its name key when it has one: "line 'SW-NE'"
            stack.extend(((*keys, f"[{v['name']!r}]" if isinstance(v, dict) and isinstance(v.get("name"), str)
                           else f"[{i}]"), v) for i, v in enumerate(node))
        elif isinstance(node, int) and not isinstance(node, bool):
            try:
                float(node)
            except OverflowError:
                key = ".".join(k for k in keys if not k.startswith("[")) or "value"
                item = "".join(k for k in keys if k.startswith("[") and not k.startswith("['"))
                named = [k[1:-1] for k in keys if k.startswith("['")]
                if named:  # "line 'SW-NE' readings": the table by its name, then the key
                    parts = [k for k in keys if not k.startswith("[") or k.startswith("['")]
                    key = " ".join(k[1:-1] if k.startswith("['") else k for k in parts)
                digits = str(abs(node))
                pos = text.find(digits[:40])
                line = f", line {text.count(chr(10), 0, pos) + 1}" if pos >= 0 else ""
                raise InputValueError(
                    f"{key}{' item ' + item if item else ''} is an integer of {len(digits)} digits, "
                    "too large for any measurement", where=f"{where}{line}, {key}",
                    fix="give the value in the unit the file states (docs/limits.md lists the accepted ranges)",
                ) from None


def open_regular(path, *, wanted: str = "a TOML survey or a CSV height map"):
    """Open a regular file for binary reading after the checks of :func:`read_text`, without reading it.

    For readers that stream a large file (a height-map CSV of millions of points) instead of holding
    its whole text. The file must be a regular file of at most :data:`MAX_TEXT_BYTES` bytes and not
    empty; reading it is bounded by the size found here.

    Returns
    -------
    (file, int)
        The open binary file (the caller closes it) and its size in bytes.

    Raises
    ------
    InputFormatError
        Missing file, a folder, a FIFO, device or socket, an empty file or one larger than
        :data:`MAX_TEXT_BYTES`.
    """
    path = Path(path)
    try:
        mode = os.stat(path).st_mode
    except FileNotFoundError:
        raise InputFormatError("no such file", where=str(path), fix="check the path") from None
    except OSError as exc:
        raise InputFormatError(f"cannot read the file ({exc.strerror or exc})", where=str(path),
                               fix="check the path and permissions") from None
    if stat.S_ISDIR(mode):
        raise InputFormatError("this is a folder, not a file", where=str(path), fix="give a file")
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))  # a FIFO must not block the open
    except OSError as exc:
        raise InputFormatError(f"cannot read the file ({exc.strerror})", where=str(path), fix="check permissions") from None
    fh = os.fdopen(fd, "rb")
    st = os.fstat(fh.fileno())
    if not stat.S_ISREG(st.st_mode):
        fh.close()
        m = st.st_mode
        kind = ("a named pipe (FIFO)" if stat.S_ISFIFO(m) else "a device" if stat.S_ISCHR(m) or stat.S_ISBLK(m)
                else "a socket" if stat.S_ISSOCK(m) else "not a regular file")
        raise InputFormatError(f"this is {kind}, not a regular file: it is not read, because it may never end",
                               where=str(path), fix=f"save {wanted} to a file and give that")
    if st.st_size > MAX_TEXT_BYTES:
        fh.close()
        raise InputFormatError(
            f"the file is larger than {MAX_TEXT_BYTES // (1024 * 1024)} MiB, more than any surface flatcheck "
            "evaluates (docs/limits.md)", where=str(path), fix=f"give {wanted}, or thin the data first")
    if st.st_size == 0:
        fh.close()
        raise InputFormatError("the file is empty", where=str(path), fix=f"give {wanted}")
    return fh, int(st.st_size)
