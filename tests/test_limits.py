"""flatcheck.limits: one range per kind of input, with its reason, stated once in docs/limits.md (issue 15)."""

import math
from pathlib import Path

import pytest

from flatcheck.errors import InputValueError
from flatcheck.limits import LIMITS, check_count, check_range, limits_table_markdown

DOC = Path(__file__).resolve().parents[1] / "docs" / "limits.md"


def test_docs_page_prints_the_table_of_the_code():
    text = DOC.read_text(encoding="utf-8")
    start = text.index("<!-- limits table")
    start = text.index("\n", start) + 1
    end = text.index("<!-- end of limits table -->")
    assert text[start:end].strip() == limits_table_markdown().strip()
    for kind in LIMITS:  # every kind is also said where it applies
        assert text.count(f"`{kind}`") >= 2, kind


@pytest.mark.parametrize("kind", sorted(LIMITS))
def test_bounds_are_inclusive_and_outside_is_refused_with_the_reason(kind):
    lim = LIMITS[kind]
    if not lim.low_open:
        assert check_range(lim.low, kind, where="here") == lim.low
    assert check_range(lim.high, kind, where="here") == lim.high
    for bad in (lim.high * (1 + 1e-9) + 1e-9, lim.low - abs(lim.low) * 1e-9 - 1e-9):
        with pytest.raises(InputValueError) as exc:
            check_range(bad, kind, where="the input")
        msg = str(exc.value)
        assert msg.startswith("the input: ") and lim.reason in msg and "\n" not in msg


@pytest.mark.parametrize("value", [float("nan"), float("inf"), -float("inf"), "abc", None, 10**400, -(10**401)])
def test_not_a_number_infinite_or_huge_integers_are_refused_not_raised_raw(value):
    with pytest.raises(InputValueError) as exc:
        check_range(value, "length_mm", where="plate.toml, line 3, length_mm")
    assert "plate.toml, line 3, length_mm" in str(exc.value)
    if isinstance(value, int):  # 10**400 cannot even become a float: said with its digit count
        assert f"{len(str(abs(value)))} digits" in str(exc.value)


def test_lower_bound_refuses_zero_and_a_slip_below_a_nanometre():
    # a target flatness: nothing is lapped to, or measured flat within, less than 1 nm (docs/limits.md)
    for v in (0.0, 1e-300, 9.99e-4):
        with pytest.raises(InputValueError, match="out of range"):
            check_range(v, "target_um", where="--target-um")
    assert check_range(1e-3, "target_um", where="--target-um") == 1e-3


def test_counts_are_whole_numbers():
    assert check_count(64, "levels", where="--levels") == 64
    with pytest.raises(InputValueError, match="whole number"):
        check_count(2.5, "levels", where="--levels")
    with pytest.raises(InputValueError, match="out of range"):
        check_count(1_000_000, "levels", where="--levels")
    # Source: JCGM 101:2008 recommends about 10^6 Monte Carlo trials (from memory); the limit admits exactly that
    assert check_count(10**6, "trials", where="--trials") == 10**6
    with pytest.raises(InputValueError):
        check_count(10**12, "trials", where="--trials")
    assert math.isfinite(LIMITS["trials"].high)
