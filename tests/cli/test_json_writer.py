"""The JSON writer of the command line (flatcheck.cli._json) against the standard library's encoder."""

import json
import math

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from flatcheck.cli._json import dumps, node_rows
from flatcheck.cli.common import jsonable
from flatcheck.form import HeightMap

_scalars = st.one_of(
    st.none(), st.booleans(), st.integers(-10**20, 10**20), st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=8),
)
_docs = st.recursive(
    _scalars,
    lambda inner: st.one_of(st.lists(inner, max_size=80), st.dictionaries(st.text(max_size=6), inner, max_size=6)),
    max_leaves=300,
)


def _reference(obj):
    # Reference: the standard library's encoder on the command line's own conversion
    return json.dumps(jsonable(obj), indent=2, ensure_ascii=False, allow_nan=False)


@given(_docs)
def test_same_text_as_json_dumps(doc):
    assert dumps(doc) == _reference(doc)


@pytest.mark.parametrize("n", [0, 1, 63, 64, 1000, 45_000])
def test_long_lists_and_records_same_text(n):
    rng = np.random.default_rng(1234)
    nums = rng.normal(size=n).tolist()
    if n > 10:
        nums[3], nums[7] = math.nan, -math.inf  # JSON has no NaN: null, as jsonable does
    recs = [{"name": f"S{i} \"q\", ü", "x_mm": float(i), "w": None if i % 5 == 0 else v, "ok": i % 2 == 0}
            for i, v in enumerate(nums)]
    swapped = [dict(reversed(list(r.items()))) if i % 3 == 0 else r for i, r in enumerate(recs)]  # key order varies
    for doc in ({"v": nums}, {"r": recs}, [nums, recs], {"ints": list(range(n))}, {"s": swapped}):
        assert dumps(doc) == _reference(doc)


def test_node_table_same_text_as_node_dicts():
    rng = np.random.default_rng(1234)
    hm = HeightMap(rng.uniform(0, 100, 500), rng.uniform(0, 50, 500), rng.normal(size=500),
                   names=[f"A{i}" for i in range(500)])
    dicts = [{"name": s, "x_mm": x, "y_mm": y, "height_um": z}
             for s, x, y, z in zip(hm.names, hm.x_mm.tolist(), hm.y_mm.tolist(), hm.height_um.tolist())]
    assert dumps({"nodes": node_rows(hm)}) == _reference({"nodes": dicts})
    assert list(node_rows(hm))[:3] == dicts[:3] and len(node_rows(hm)) == 500


def test_reduce_json_of_a_height_map_lists_every_node(cli, tmp_path):
    # the command writes a map's nodes from its arrays; they must be the evaluation's own node list
    from flatcheck.evaluation import evaluate_surface
    from flatcheck.io import open_surface

    X, Y = np.meshgrid(np.arange(30) * 2.0, np.arange(20) * 3.0)
    Z = np.sin(X / 7) + 0.01 * Y
    p = tmp_path / "m.csv"
    with open(p, "w") as f:
        f.write("x_mm,y_mm,height_um\n")
        np.savetxt(f, np.column_stack([X.ravel(), Y.ravel(), Z.ravel()]), fmt="%.17g", delimiter=",")
    code, out, err = cli("reduce", p, "--json")
    assert code == 0 and "Traceback" not in err
    nodes = json.loads(out)["nodes"]
    ref = evaluate_surface(open_surface(p), window="none").to_dict(nodes=True)["nodes"]
    assert nodes == ref
