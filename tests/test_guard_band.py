"""Lapping targets to prove: the ISO 14253-1 guard band (flatcheck.lapping._guard_band)."""

import pytest

from flatcheck.conformance import decide
from flatcheck.errors import InputValueError
from flatcheck.lapping import guard_banded, needs_budget_u, parse_guard_band, target_kind


def test_a_grade_limit_is_aimed_below_by_u():
    # ISO 14253-1:2017 default rule, REFERENCE section 10 item 24: limit 4.0 µm, U 0.4 µm. Conformity is proven
    # only up to the acceptance limit T - U = 3.6 µm, so that is what the plan aims at.
    t = guard_banded(4.0, "din-876 grade 00", "grade", "auto", 0.4, "this survey's budget")
    assert t.aim_um == pytest.approx(3.6) and t.guard_band_um == 0.4 and t.proven
    # the worked values: a survey after lapping at 3.5 proves the limit, at 3.7 it leaves it undecided,
    # at 4.5 it proves non-conformity (REFERENCE section 10 item 24)
    assert decide(3.5, t.limit_um, t.guard_band_um).verdict == "conforms" and 3.5 <= t.aim_um
    assert decide(3.7, t.limit_um, t.guard_band_um).verdict == "undecided" and 3.7 > t.aim_um
    assert decide(4.5, t.limit_um, t.guard_band_um).verdict == "does-not-conform"
    # aiming at the acceptance limit exactly is proven conformity (F <= T - U, ISO 14253-1)
    assert decide(t.aim_um, t.limit_um, t.guard_band_um).verdict == "conforms"


def test_a_number_stays_as_given_unless_a_guard_band_is_asked():
    assert guard_banded(4.0, "given", "given", "auto", None, None).aim_um == 4.0
    assert guard_banded(4.0, "given", "given", "budget", 0.4, "budget").aim_um == pytest.approx(3.6)
    assert guard_banded(4.0, "given", "given", 0.4).aim_um == pytest.approx(3.6)
    t = guard_banded(4.0, "given", "grade", "none", 0.4, "budget")
    assert t.aim_um == 4.0 and t.guard_band_um == 0 and not t.proven and "cannot prove" in t.guard_band_source


def test_which_targets_need_the_budget():
    assert needs_budget_u("grade", "auto") and needs_budget_u("gap", "auto")
    assert not needs_budget_u("given", "auto") and needs_budget_u("given", "budget")
    assert not needs_budget_u("grade", "none") and not needs_budget_u("grade", 0.3)
    assert target_kind(None, "din-876:0", None) == "grade" and target_kind(None, None, 8.0) == "gap"
    assert target_kind(3.0, None, None) == "given"


def test_no_u_to_be_had():
    # a limit without a U (a height map without --u-height-um): the plan aims at the limit and says why
    t = guard_banded(2.0, "gap", "gap", "auto", None, "a height map carries no reading uncertainty")
    assert t.aim_um == 2.0 and not t.proven and "height map" in t.guard_band_source
    with pytest.raises(InputValueError) as e:  # asked for explicitly: an error naming the option
        guard_banded(2.0, "given", "given", "budget", None, "a height map carries no reading uncertainty")
    assert e.value.where == "--guard-band"


def test_a_guard_band_as_large_as_the_limit_is_refused():
    # U >= T: F <= T - U <= 0 is the only proof left (ISO 14253-1), which no surface gives
    with pytest.raises(InputValueError) as e:
        guard_banded(0.3, "given", "grade", "auto", 0.5, "budget")
    assert e.value.where == "--guard-band" and "as large as the limit" in e.value.message


@pytest.mark.parametrize("text, expected", [(None, "auto"), ("AUTO", "auto"), ("budget", "budget"),
                                            ("none", "none"), ("0.4", 0.4), ("0", 0.0)])
def test_parse_guard_band(text, expected):
    assert parse_guard_band(text) == expected


@pytest.mark.parametrize("text", ["x", "-0.1", "nan", "inf"])
def test_parse_guard_band_refuses(text):
    with pytest.raises(InputValueError) as e:
        parse_guard_band(text)
    assert e.value.where == "--guard-band"
