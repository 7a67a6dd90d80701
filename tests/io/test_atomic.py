"""Atomic output never leaves half-written files nor destroys earlier ones."""

import pytest

from flatcheck.errors import OutputError
from flatcheck.io import atomic_path, write_text_atomic


def test_failure_keeps_previous_file(tmp_path):
    p = tmp_path / "result.csv"
    p.write_text("previous\n")
    with pytest.raises(RuntimeError):
        with atomic_path(p) as tmp:
            tmp.write_text("half")
            raise RuntimeError("boom")
    assert p.read_text() == "previous\n"
    assert [f.name for f in tmp_path.iterdir()] == ["result.csv"]  # no temporary left behind


def test_success_replaces(tmp_path):
    p = tmp_path / "result.csv"
    p.write_text("previous\n")
    write_text_atomic(p, "new\n")
    assert p.read_text() == "new\n"


def test_missing_folder(tmp_path):
    with pytest.raises(OutputError, match="does not exist"):
        write_text_atomic(tmp_path / "nope" / "x.txt", "x")
