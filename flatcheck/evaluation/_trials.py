"""How many Monte Carlo trials an evaluation uses when the person does not say."""

from __future__ import annotations

__all__ = ["DEFAULT_TRIALS", "default_trials"]

#: Trials of an asked-for Monte Carlo evaluation (JCGM 101:2008 7.2: enough for U to the digits stated).
#: Monte Carlo trials unless asked otherwise (JCGM 101:2008 asks M >> 1/(1-p); 1e5 gives the
#: standard uncertainty to well under 1 % and the 95 % interval ends to about 1 %).
DEFAULT_TRIALS = 100_000


def default_trials(n_stations: int) -> int:
    """Monte Carlo trials when ``grade`` or ``report`` evaluates U without being asked for a number of trials.

    JCGM 101:2008 asks for enough trials that U is stable to the digits stated; 10^5 trials are cheap for a
    plate survey of a few dozen stations, but a dense grid of a thousand stations would take the better part
    of a minute (measured: 874 stations, 44 s). Each trial costs about in proportion to the stations, so the default keeps roughly the same
    work (about 8 million station-trials, a few seconds here) and never goes below 10 000 trials, which
    still give U to about 1-2 % (the note states the number used; ``--trials`` overrides).
    """
    return int(min(DEFAULT_TRIALS, max(10_000, round(8e6 / max(int(n_stations), 1), -4))))
