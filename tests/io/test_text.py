"""Reading input files: only regular files, a bounded amount, and TOML that no flatcheck file could hold refused
with the key it was found at (issue 15, items 15 and 16)."""

import os
import threading

import pytest

from flatcheck.errors import InputFormatError, InputValueError
from flatcheck.io import _text
from flatcheck.io._text import MAX_TOML_DEPTH, parse_toml, read_text, toml_loads


def _in_time(fn, seconds=10.0):
    """Run ``fn`` in a thread and fail (instead of hanging the test run) if it does not return in time."""
    box = {}

    def run():
        try:
            box["value"] = fn()
        except BaseException as exc:  # noqa: BLE001 - handed back to the test
            box["error"] = exc

    t = threading.Thread(target=run, daemon=True)
    t.start()
    t.join(seconds)
    assert not t.is_alive(), f"did not return within {seconds} s"
    if "error" in box:
        raise box["error"]
    return box.get("value")


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="no /dev/zero on this system")
def test_a_device_is_refused_unread():
    with pytest.raises(InputFormatError, match="device, not a regular file"):
        _in_time(lambda: read_text("/dev/zero"))


@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no named pipes on this system")
def test_a_fifo_with_no_writer_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "survey.toml"
    os.mkfifo(fifo)
    with pytest.raises(InputFormatError, match="named pipe"):
        _in_time(lambda: read_text(fifo))


def test_a_file_larger_than_the_limit_is_refused(tmp_path, monkeypatch):
    monkeypatch.setattr(_text, "MAX_TEXT_BYTES", 1000)
    big = tmp_path / "big.csv"
    big.write_text("x_mm,y_mm,height_um\n" + "1,2,3\n" * 400, encoding="utf-8")
    with pytest.raises(InputFormatError, match="larger than"):
        read_text(big)
    small = tmp_path / "small.csv"
    small.write_text("x_mm,y_mm,height_um\n1,2,3\n", encoding="utf-8")
    assert read_text(small).startswith("x_mm")


def test_deep_nesting_is_refused_not_a_recursion_error():
    deep = "x = " + "[" * 100_000 + "]" * 100_000 + "\n"
    with pytest.raises(InputFormatError, match="nested more than"):
        _in_time(lambda: toml_loads(deep, where="deep.toml"))
    # just past the limit, as parsed (the parser itself copes): still refused
    nested = "x = " + "[" * (MAX_TOML_DEPTH + 2) + "1" + "]" * (MAX_TOML_DEPTH + 2) + "\n"
    with pytest.raises(InputFormatError, match="nested more than"):
        toml_loads(nested, where="deep.toml")
    ok = "x = [[1, 2], [3]]\n[a.b]\nc = 1\n"
    assert toml_loads(ok, where="ok.toml") == {"x": [[1, 2], [3]], "a": {"b": {"c": 1}}}


def test_an_integer_too_large_for_a_float_names_its_key_and_line():
    big = "9" * 401
    text = f"[surface]\nident = 'P1'\nlength_mm = {big}\n"
    with pytest.raises(InputValueError) as exc:
        toml_loads(text, where="plate.toml")
    msg = str(exc.value)
    assert msg.startswith("plate.toml, line 3, surface.length_mm:") and "401 digits" in msg
    text = f"[[line]]\nname = 'A'\nreadings = [1.0, {big}]\n"
    with pytest.raises(InputValueError, match=r"line 3, line 'A' readings: line 'A' readings item \[1\]"):
        toml_loads(text, where="plate.toml")


def test_parse_toml_words_a_syntax_error_as_one_line():
    with pytest.raises(InputFormatError) as exc:
        parse_toml("a = [1, 2\n", where="bad.toml")
    assert str(exc.value).startswith("bad.toml: not valid TOML") and "\n" not in str(exc.value)
