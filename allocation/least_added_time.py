"""`least-added-time`: the car that costs the passenger and those already aboard least."""
from __future__ import annotations

import numpy as np

from .registry import register_policy


@register_policy(
    "least-added-time",
    headline=True,
    summary="Each passenger, as they register, is given the car that minimises their own "
            "estimated time until the car leaves plus the time their extra stop and transfer "
            "add to the passengers already given that car. It weighs a short wait against "
            "an extra stop for others.",
    source="Estimated-time-of-arrival allocation that adds the passenger's waiting time to "
           "the delay caused to others, as described for destination control in CIBSE Guide "
           "D, 2015 (from memory); the estimate here is the transparent one stated in the "
           "module notes.")
def choose_least_added_time(origin, destination, cars, timing, table):
    """cost(car) = max(leaves_in_s, 0) + added, with, for the car's ``load`` passengers
    already committed,

        added = load t_in                            (one more boarding before they leave)
              + a (t_out + stop)                     (one more alighting, a new stop)

    where a = load x (promised stops above the floor) / (promised stops), an even-spread
    estimate of those riding past the floor, and ``stop`` is, when the floor is not
    already a stop, the extra flight t_f(lo, f) + t_f(f, hi) - t_f(lo, hi) between the
    neighbouring promised stops plus the stop overhead (0 when it is a stop). The
    passenger's estimate is the time until the car leaves the lobby (its doors open and
    the lobby dwell), the part of their waiting that delays their arrival."""
    f = destination if destination != 0 else origin
    one = np.uint64(1)
    bit = one << np.uint64(f)
    best = -1
    best_cost = np.inf
    flight = timing.flight_s
    for c in range(cars.shape[0]):
        if cars[c]["room"] <= 0:
            continue
        stops = cars[c]["up_stops"] | cars[c]["down_stops"]
        load = cars[c]["load"]
        cost = max(cars[c]["leaves_in_s"], 0.0) + load * timing.transfer_in_s
        if load > 0:
            total = 0
            above = 0
            lo = 0
            hi = -1
            for g in range(1, flight.shape[0]):
                if (stops >> np.uint64(g)) & one:
                    total += 1
                    if g > f:
                        above += 1
                        if hi < 0:
                            hi = g
                    elif g < f:
                        lo = g
            riders_above = load * above / max(total, 1)
            extra = 0.0
            if not (stops & bit) and hi >= 0:
                extra = flight[lo, f] + flight[f, hi] - flight[lo, hi] + timing.stop_overhead_s
            cost += riders_above * (timing.transfer_out_s + extra)
        if cost < best_cost or (cost == best_cost and best >= 0
                                and cars[c]["opens_in_s"] < cars[best]["opens_in_s"]):
            best = c
            best_cost = cost
    return best
