"""docs/survey-format.md: its examples are whole files that reduce, and they use every key of the format.

The full example had 2 of its 8 Union Jack lines and `flatcheck reduce` on it exited 2.
"""

import json
import re
from pathlib import Path

import pytest

from flatcheck.io import _survey_toml as st

DOC = Path(__file__).resolve().parents[2] / "docs" / "survey-format.md"


def _examples():
    return re.findall(r"```toml\n(.*?)```", DOC.read_text(encoding="utf-8"), re.S)


def test_the_doc_has_a_full_example_and_others():
    ex = _examples()
    assert len(ex) >= 2
    assert 'pattern = "union-jack"' in ex[0]


@pytest.mark.parametrize("k", range(len(_examples())))
def test_every_example_reduces_as_written(cli, tmp_path, k):
    p = tmp_path / f"example-{k + 1}.toml"
    p.write_text(_examples()[k], encoding="utf-8")
    code, out, err = cli("reduce", p, "--json")
    assert code == 0, err
    doc = json.loads(out)
    survey = st.read_survey(p)
    assert len(doc["nodes"]) == len(survey.stations) and survey.has_readings


def _accepted_keys():
    """Every key the reader accepts, per table (flatcheck.io.survey_toml's own lists)."""
    return {
        "": st._TOP_KEYS, "surface": st._SURFACE_KEYS, "instrument": st._INSTRUMENT_KEYS,
        "layout": st._LAYOUT_KEYS, "conditions": st._CONDITION_KEYS, "line": st._LINE_KEYS, "line.run": st._RUN_KEYS,
    }


def _keys_used(text):
    """(table, key) pairs set in a TOML text, tables included as keys of their parent."""
    used, table = set(), ""
    for raw in text.splitlines():
        line = raw.split("#", 1)[0].strip()
        m = re.fullmatch(r"\[\[?([a-z_.]+)\]\]?", line)
        if m:
            table = m.group(1)
            parent, _, name = table.rpartition(".")
            used.add((parent, name))
            continue
        m = re.match(r"([a-z_]+)\s*=", line)
        if m:
            used.add((table, m.group(1)))
    return used


def test_every_key_of_the_format_is_documented_and_used_in_an_example():
    text = DOC.read_text(encoding="utf-8")
    used = set().union(*(_keys_used(e) for e in _examples()))
    missing_doc, missing_ex = [], []
    for table, keys in _accepted_keys().items():
        for key in keys:
            twin = key[:-3] + "_mm" if key.endswith("_in") else None
            names = (f"`{key}`", f"[{key}]", f"[[{key}]]", f"[[line.{key}]]") + ((f"`{twin}`",) if twin else ())
            if not any(n in text for n in names):
                missing_doc.append(f"{table}.{key}")
            if (table, key) not in used:
                missing_ex.append(f"[{table}] {key}")
    assert not missing_doc, f"keys the reader accepts but the doc does not name: {missing_doc}"
    assert not missing_ex, f"keys used by no example: {missing_ex}"
