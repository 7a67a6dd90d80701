"""ISO 14253-1 decision rules for an upper flatness limit."""

import pytest
from hypothesis import given
from hypothesis import strategies as st

from flatcheck.conformance import assess_grades, decide, normalise_rule
from flatcheck.errors import InputValueError
from flatcheck.conformance import tolerances


def test_reference_item_24():
    # Source: REFERENCE.md section 10 item 24 (ISO 14253-1:2017 default rule, upper limit 4.0 µm, U 0.4):
    # F 3.5 conforms; 3.7 undecided; 4.5 non-conforming.
    assert decide(3.5, 4.0, 0.4).verdict == "conforms"
    assert decide(3.7, 4.0, 0.4).verdict == "undecided"
    assert decide(4.5, 4.0, 0.4).verdict == "does-not-conform"


@pytest.mark.parametrize(
    "flatness, verdict",
    # ISO 14253-1:2017 clause 5 (default rule): conformity proven iff F <= T - U, non-conformity iff
    # F > T + U (REFERENCE.md section 5). T = 4.0, U = 0.4 -> limits 3.6 and 4.4.
    [
        (3.599, "conforms"),
        (3.6, "conforms"),  # exactly on T - U: inside the reduced zone
        (3.601, "undecided"),
        (3.999, "undecided"),
        (4.0, "undecided"),  # at T
        (4.001, "undecided"),
        (4.4, "undecided"),  # exactly on T + U: not outside the enlarged zone
        (4.401, "does-not-conform"),
    ],
)
def test_iso_edges_with_uncertainty(flatness, verdict):
    d = decide(flatness, 4.0, 0.4, rule="iso14253")
    assert d.verdict == verdict
    assert d.rule == "iso14253-1" and d.uncertainty_known
    assert d.acceptance_limit_um == pytest.approx(3.6) and d.rejection_limit_um == pytest.approx(4.4)
    assert "ISO 14253-1" in d.statement


@pytest.mark.parametrize(
    "flatness, verdict",
    # Simple acceptance (no guard band; REFERENCE.md 4.3 "simple acceptance"): F <= T conforms.
    [(3.999, "conforms"), (4.0, "conforms"), (4.001, "does-not-conform")],
)
def test_simple_acceptance_edges(flatness, verdict):
    d = decide(flatness, 4.0, 0.4, rule="simple")
    assert d.verdict == verdict and d.rule == "simple-acceptance" and d.rule_requested == "simple-acceptance"
    assert "simple acceptance" in d.statement and "not used" in d.statement


@pytest.mark.parametrize("flatness, verdict", [(3.999, "conforms"), (4.0, "conforms"), (4.001, "does-not-conform")])
def test_unknown_uncertainty_falls_back_and_says_so(flatness, verdict):
    d = decide(flatness, 4.0, None)  # default rule requested, U unknown
    assert d.verdict == verdict
    assert d.rule == "simple-acceptance" and d.rule_requested == "iso14253-1"
    assert not d.uncertainty_known and d.expanded_uncertainty_um is None
    assert "uncertainty unknown" in d.statement


def test_zero_uncertainty_equals_simple_acceptance():
    # With U = 0 the ISO zones collapse onto T (ISO 14253-1: the guard band is U).
    for f in (3.9, 4.0, 4.1):
        assert decide(f, 4.0, 0.0).verdict == decide(f, 4.0, rule="simple").verdict


def test_uncertainty_larger_than_tolerance_never_conforms():
    d = decide(0.1, 1.0, 1.5)
    assert d.verdict == "undecided" and "U >= T" in d.statement
    assert decide(2.6, 1.0, 1.5).verdict == "does-not-conform"


def test_bad_values():
    with pytest.raises(InputValueError):
        decide(-1.0, 4.0, 0.4)
    with pytest.raises(InputValueError):
        decide(1.0, 0.0, 0.4)
    with pytest.raises(InputValueError):
        decide(1.0, 4.0, -0.1)
    with pytest.raises(InputValueError):
        decide(float("nan"), 4.0, 0.4)
    with pytest.raises(InputValueError, match="rule"):
        normalise_rule("guard-band-50")


@given(
    f=st.floats(0, 100, allow_nan=False),
    t=st.floats(0.1, 100),
    u=st.floats(0, 20),
)
def test_verdict_partition(f, t, u):
    # ISO 14253-1 partitions the result axis into three zones; simple acceptance only moves the limit to T.
    d = decide(f, t, u)
    if f <= t - u - 1e-6 * t:
        assert d.verdict == "conforms"
    elif f > t + u + 1e-6 * max(t, f):
        assert d.verdict == "does-not-conform"
    elif t - u + 1e-6 * t < f <= t + u - 1e-6 * max(t, f):
        assert d.verdict == "undecided"
    # guard banding never proves more than simple acceptance does
    s = decide(f, t, u, rule="simple")
    if d.verdict == "conforms":
        assert s.verdict == "conforms"
    if d.verdict == "does-not-conform":
        assert s.verdict == "does-not-conform"


def test_assess_grades_finest_first():
    # DIN 876 1000 x 630: 00 = 4, 0 = 8, 1 = 20 µm (REFERENCE.md 4.4). F = 6 µm, U = 1 µm:
    # 00 -> 6 > 5 does not conform; 0 -> 6 <= 7 conforms; coarser grades conform.
    res = assess_grades(6.0, tolerances("din-876", 1000, 630), 1.0)
    assert [r.tolerance.grade for r in res] == ["00", "0", "1", "2", "3"]
    assert [r.decision.verdict for r in res] == ["does-not-conform", "conforms", "conforms", "conforms", "conforms"]
