"""Fixtures of the records tests: register entries made from the sample surveys."""

from pathlib import Path

import pytest

SAMPLES = Path(__file__).resolve().parents[2] / "sample_readings"


@pytest.fixture
def entry_of():
    """``entry_of(path, **options)``: the register entry of a survey file (a short Monte Carlo run)."""
    import flatcheck
    from flatcheck import open_surface as load_input
    from flatcheck.records import survey_entry

    def make(path, *, trials=300, seed=1, **options):
        path = Path(path)
        loaded = load_input(path)
        mc = dict(trials=trials, seed=seed) if loaded.survey is not None else None
        ev = flatcheck.evaluate_surface(loaded, monte_carlo=mc)
        return survey_entry(ev, path.read_text(encoding="utf-8"), source_name=str(path), **options)

    return make


@pytest.fixture
def samples():
    """The folder of the sample readings."""
    return SAMPLES
