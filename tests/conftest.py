"""Shared test configuration.

The hypothesis profile is deterministic by default (derandomised, no example
database) so that CI runs are repeatable; set FLATCHECK_HYPOTHESIS=random to
explore with fresh random examples.
"""

import os

import numpy as np
import pytest
from hypothesis import HealthCheck, settings

settings.register_profile(
    "deterministic",
    derandomize=True,
    database=None,
    deadline=None,
    max_examples=60,
    suppress_health_check=[HealthCheck.too_slow],
)
settings.register_profile("random", deadline=None, max_examples=200)
settings.load_profile("random" if os.environ.get("FLATCHECK_HYPOTHESIS") == "random" else "deterministic")


@pytest.fixture
def rng():
    """A seeded random generator (seed 1234) for reproducible synthetic data."""
    return np.random.default_rng(1234)


@pytest.fixture
def cli(capsys):
    """Run the command line in-process; returns ``(exit_code, stdout, stderr)``."""
    from flatcheck.cli.main import run

    def _run(*argv):
        code = run([str(a) for a in argv])
        out, err = capsys.readouterr()
        return code, out, err

    return _run
