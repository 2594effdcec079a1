"""Run limits: the memory and time one run may take, stated once.

A Monte Carlo run keeps its per-trial sample until it ends (the estimates and
the charts are made from it) and draws one random number per passenger, so its
memory grows with trials x cars x rules and with trials x passengers. These
bounds keep every run of the command line within about a gigabyte and a few
minutes on an ordinary computer; a run that would need more is refused before
it starts, with the limit in the message, and an adaptive run (stopping on
``--ci-target``) simply stops at the trial count the limits allow, reporting the
interval it reached.

Orchestration (:mod:`experiments.estimates`, ``sweep``, ``sizing``,
``report_job``) caps its adaptive runs with :func:`trial_cap`; the command line
checks an exact ``--trials N`` with :func:`trials_problem` and uses the other
bounds for its option checks (:mod:`experiments.cli.options`). Standard
library only: ``liftsort calc`` imports this module.
"""
from __future__ import annotations

import math

#: Most passengers offered per trip (``--passengers``): ten times the largest rated load
#: accepted (100 persons); beyond the rated load the extra passengers are only left behind.
MAX_PASSENGERS_PER_TRIP = 1000.0

#: Bytes a run keeps per car trip: its round-trip time and seven integer counts.
BYTES_PER_CAR_TRIP = 64

#: Most car trips a run keeps (trials x cars x rules): 8 million, about 0.5 GB.
MAX_KEPT_CAR_TRIPS = 8_000_000

#: Most passengers a run draws (trials x cars x passengers per car): 40 million (one
#: 8-byte uniform each, about 0.3 GB for the largest chunk).
MAX_DRAWN_PASSENGERS = 40_000_000

#: Most values in one range option (``--arrival``, ``--cars``, ``--loads``, ...).
MAX_RANGE_VALUES = 200

#: Most points of a sweep (demand points x cars x cars open) and candidates of a sizing
#: search (cars x loads x speeds): each is a full comparison of the rules.
MAX_RUNS = 200


def trial_cap(max_trials: int, *, cars: int = 1, rules: int = 1,
              passengers_per_car: float = 0.0) -> int:
    """The largest trial count a run may reach within the limits (at least 2).

    Parameters
    ----------
    max_trials : int
        The trial cap asked for (``--max-trials``).
    cars : int
        Cars whose trips each trial keeps (1 for one car's round trips).
    rules : int
        Rules run on the same trials (1 for one car's round trips).
    passengers_per_car : float
        The largest mean passengers per car per trial the run will use [persons].
    """
    kept = MAX_KEPT_CAR_TRIPS // max(1, cars * rules)
    drawn = MAX_DRAWN_PASSENGERS / max(1e-9, cars * passengers_per_car)
    return int(max(2, min(max_trials, kept, math.floor(min(drawn, 1e18)))))


def trials_problem(trials: int, *, cars: int = 1, rules: int = 1,
                   passengers_per_car: float = 0.0) -> str | None:
    """Why an exact run of ``trials`` trials is refused (None when it is within the limits)."""
    cap = trial_cap(trials, cars=cars, rules=rules, passengers_per_car=passengers_per_car)
    if trials <= cap:
        return None
    what = (f"{cars} car{'s' if cars != 1 else ''} x {rules} rule{'s' if rules != 1 else ''}"
            if cars * rules > 1 else "one car")
    return (f"--trials {trials:,}: a run with {what} at {passengers_per_car:g} passengers "
            f"per car may have at most {cap:,} trials (it keeps at most "
            f"{MAX_KEPT_CAR_TRIPS:,} car trips and draws at most {MAX_DRAWN_PASSENGERS:,} "
            f"passengers, to stay within about a gigabyte of memory); give fewer trials, or "
            f"leave --trials out and let --ci-target decide.")
