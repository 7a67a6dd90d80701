"""JSON output that stays fast and small for maps of millions of points.

``json.dumps(obj, indent=2)`` falls back to the pure-Python encoder (CPython's C encoder
only writes compact JSON) and a conversion pass first walks every object. For a
10^6-point map that is four million Python objects walked twice. This module writes the
same text (the layout of ``json.dumps(..., indent=2, ensure_ascii=False)`` after
:func:`jsonable`'s conversions) but:

- long lists of numbers are encoded by the C encoder in one call and only split into
  lines (no Python step per number);
- long lists of flat records with the same keys (nodes, readings) are encoded column by
  column the same way, and assembled row by row from the encoded tokens;
- :class:`JsonRows` holds such a table as columns (numpy arrays) without building a
  dict per row, and is written in blocks straight to the stream;
- the text is streamed to the output in blocks instead of being built whole.

Non-finite numbers become ``null`` (JSON has no NaN), as :func:`jsonable` does.
"""

from __future__ import annotations

import dataclasses
import json
import math
from enum import Enum
from operator import itemgetter
from pathlib import Path

__all__ = ["JsonRows", "node_rows", "to_jsonable", "write_json", "dumps"]

_BLOCK_ROWS = 20_000  # rows encoded and written at once
_FAST_MIN = 64  # lists shorter than this take the plain path (no gain from the fast one)
_SCALARS = (float, int)


class JsonRows:
    """A table written as a JSON list of records ``{key: value, ...}``, one per row, held as columns.

    Parameters
    ----------
    columns : dict of str -> sequence
        Column name -> values (numpy arrays of numbers, or sequences of str), all the same
        length; the key order is the order of the keys in each record.

    Notes
    -----
    It behaves as a read-only sequence of dicts (``len``, indexing, iteration), so code that
    reads a document holding one still works; :func:`to_jsonable` turns it into a list.
    """

    def __init__(self, columns: dict):
        self.columns = dict(columns)
        sizes = {len(v) for v in self.columns.values()}
        if len(sizes) > 1:
            raise ValueError("JsonRows: columns differ in length")
        self._n = sizes.pop() if sizes else 0

    def __len__(self) -> int:
        return self._n

    def __getitem__(self, k):
        if isinstance(k, slice):
            return [self[i] for i in range(*k.indices(self._n))]
        return {name: to_jsonable(col[k]) for name, col in self.columns.items()}

    def __iter__(self):
        for k in range(self._n):
            yield self[k]

    def __eq__(self, other):
        return list(self) == list(other)

    def block(self, start: int, stop: int) -> list:
        """Each column's values for rows ``start:stop`` as Python lists."""
        out = []
        for col in self.columns.values():
            part = col[start:stop]
            out.append(part.tolist() if hasattr(part, "tolist") else list(part))
        return out


def node_rows(hm, *, names=True) -> JsonRows:
    """The nodes of a height map as a :class:`JsonRows` table (``name`` when the map has names).

    Parameters
    ----------
    hm : flatcheck.form.HeightMap
        Positions in mm, heights in µm.

    Returns
    -------
    JsonRows
        Records ``{"name", "x_mm", "y_mm", "height_um"}`` (``name`` only for named stations).
    """
    cols = {}
    if names and hm.names is not None:
        cols["name"] = hm.names
    cols.update(x_mm=hm.x_mm, y_mm=hm.y_mm, height_um=hm.height_um)
    return JsonRows(cols)


def to_jsonable(obj):
    """Convert numpy scalars and arrays, dataclasses, tuples, enums, paths and non-finite floats
    for JSON (the conversions of the command line's ``jsonable``; NaN and infinities -> None)."""
    t = type(obj)
    if t is str or t is bool or t is int or obj is None:
        return obj
    if t is float:
        return obj if math.isfinite(obj) else None
    if t is dict or isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if t is list or t is tuple or isinstance(obj, (list, tuple, JsonRows)):
        return [to_jsonable(v) for v in obj]
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {f.name: to_jsonable(getattr(obj, f.name)) for f in dataclasses.fields(obj) if not f.name.startswith("_")}
    try:
        import numpy as np
    except ImportError:  # pragma: no cover - numpy is a dependency
        np = None
    if np is not None:
        if isinstance(obj, np.ndarray):
            return to_jsonable(obj.tolist())
        if isinstance(obj, np.bool_):
            return bool(obj)
        if isinstance(obj, np.integer):
            return int(obj)
        if isinstance(obj, np.floating):
            v = float(obj)
            return v if math.isfinite(v) else None
    if isinstance(obj, float):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, Enum):
        return obj.value
    if isinstance(obj, Path):
        return str(obj)
    return obj


def _tokens(values: list) -> list:
    """JSON text of each number in ``values`` (floats and ints), by the C encoder in one call."""
    if not values:
        return []
    text = json.dumps(values, allow_nan=True)  # C speed; NaN/Infinity written as such, fixed below
    toks = text[1:-1].split(", ")
    if "NaN" in text or "Infinity" in text:  # only numbers here, so these can only be non-finite values
        toks = ["null" if t in ("NaN", "Infinity", "-Infinity") else t for t in toks]
    return toks


def _scalar(o) -> str:
    """JSON text of one converted scalar (or raise TypeError, as json.dumps would)."""
    if o is None:
        return "null"
    if o is True:
        return "true"
    if o is False:
        return "false"
    t = type(o)
    if t is int:
        return int.__repr__(o)
    if t is float:
        return float.__repr__(o) if math.isfinite(o) else "null"
    if t is str:
        return json.dumps(o, ensure_ascii=False)
    return json.dumps(o, ensure_ascii=False, allow_nan=False)  # subclasses, or TypeError for the unknown


def _record_keys(rows: list):
    """The shared key list when ``rows`` are flat dicts with the same keys and scalar values, else None."""
    first = rows[0]
    if type(first) is not dict or not first:
        return None
    keys = list(first)
    if not all(type(k) is str for k in keys):
        return None
    kt = tuple(keys)  # same keys in the same order (dict_keys compare as sets, order matters in the text)
    if not all(type(r) is dict and tuple(r) == kt for r in rows):
        return None
    return keys


def _column_tokens(col: list):
    """Encoded tokens of one column of records, or None when it holds something other than scalars."""
    types = set(map(type, col))
    if types <= {float, int}:
        return _tokens(col)
    if types <= {str}:
        return [json.dumps(s, ensure_ascii=False) for s in col]  # text may hold ", ": one call each
    if types <= {float, int, type(None), bool, str}:
        return [_scalar(v) for v in col]
    return None


def _write_records(write, keys, columns_of_block, level):
    """Write records (already split into blocks of column lists) in the indent-2 layout."""
    ind1 = "  " * (level + 1)
    ind2 = "  " * (level + 2)
    # one %-template per record: each row is formatted by one C call
    heads = [f'{ind2}{json.dumps(k, ensure_ascii=False)}: '.replace("%", "%%") for k in keys]
    template = ind1 + "{\n" + ",\n".join(h + "%s" for h in heads) + "\n" + ind1 + "}"
    first = True
    for cols in columns_of_block:
        toks = [_column_tokens(c) for c in cols]
        if any(t is None for t in toks):
            return False
        if toks and toks[0]:
            write(("" if first else ",\n") + ",\n".join(map(template.__mod__, zip(*toks))))
            first = False
    return True


def write_json(obj, write, *, level: int = 0) -> None:
    """Write ``obj`` as JSON with an indent of 2 through ``write(text)``.

    The text equals ``json.dumps(to_jsonable(obj), indent=2, ensure_ascii=False,
    allow_nan=False)`` (module notes), without its trailing newline.
    """
    ind = "  " * level
    ind1 = "  " * (level + 1)
    if isinstance(obj, JsonRows):
        if len(obj) == 0:
            write("[]")
            return
        keys = list(obj.columns)
        write("[\n")
        blocks = (obj.block(s, min(s + _BLOCK_ROWS, len(obj))) for s in range(0, len(obj), _BLOCK_ROWS))
        if not _write_records(write, keys, blocks, level):
            raise TypeError("JsonRows columns must hold numbers or text")
        write("\n" + ind + "]")
        return
    o = to_jsonable(obj) if not isinstance(obj, (dict, list, tuple)) else obj
    if isinstance(o, dict):
        if not o:
            write("{}")
            return
        write("{\n")
        first = True
        for k, v in o.items():
            write(("" if first else ",\n") + ind1 + json.dumps(str(k), ensure_ascii=False) + ": ")
            write_json(v, write, level=level + 1)
            first = False
        write("\n" + ind + "}")
        return
    if isinstance(o, (list, tuple)):
        if not o:
            write("[]")
            return
        seq = o if isinstance(o, list) else list(o)
        if len(seq) >= _FAST_MIN:
            if set(map(type, seq)) <= {float, int}:
                toks = _tokens(seq)
                write("[\n")
                for s in range(0, len(toks), _BLOCK_ROWS):
                    write(("" if s == 0 else ",\n") + ",\n".join([ind1 + t for t in toks[s:s + _BLOCK_ROWS]]))
                write("\n" + ind + "]")
                return
            keys = _record_keys(seq)
            if keys is not None:
                getters = [itemgetter(k) for k in keys]
                cols_blocks = []
                for s in range(0, len(seq), _BLOCK_ROWS):
                    part = seq[s:s + _BLOCK_ROWS]
                    cols_blocks.append([list(map(g, part)) for g in getters])
                # check every column first, so nothing is written for a table the fast path cannot take
                if all(set(map(type, c)) <= {float, int, str, bool, type(None)} for b in cols_blocks for c in b):
                    write("[\n")
                    _write_records(write, keys, cols_blocks, level)
                    write("\n" + ind + "]")
                    return
        write("[\n")
        first = True
        for v in seq:
            write(("" if first else ",\n") + ind1)
            write_json(v, write, level=level + 1)
            first = False
        write("\n" + ind + "]")
        return
    write(_scalar(o))


def dumps(obj) -> str:
    """The JSON text of ``obj`` (indent 2, as :func:`write_json`), as one string."""
    parts = []
    write_json(obj, parts.append)
    return "".join(parts)
