"""`fewest-stops`: a capacity-aware greedy destination allocation."""
from __future__ import annotations

from .registry import register


@register(
    "fewest-stops",
    summary="Each passenger, in order of arrival, is given the car to which they add the "
            "fewest new stops; on a tie, the lighter car, then the car whose highest floor "
            "rises least. No car takes more than its equal share of the batch, so all "
            "leave with similar loads.",
    source="Greedy stop-minimising hall-call allocation, the simplest destination-control "
           "heuristic (common practice).")
def allocate_fewest_stops(origins, destinations, cars_open, car_limit, params, scratch, car_out):
    """New stops of a passenger in a car: their origin (the lobby is always a stop) and
    destination floors that the car does not yet serve in the passenger's direction.
    A car is open to a passenger while it has fewer than ``car_limit``.

    Ties go to the lighter car before the smaller rise of the reversal floor: the
    other order lets a loaded car win every tie against an empty one (an empty
    car's reversal floor rises the whole way), so the cars fill one after another
    in arrival order and the rule collapses into conventional control.
    """
    n = origins.shape[0]
    up = scratch[0:cars_open]                 # stop masks, bit f for floor f
    down = scratch[cars_open:2 * cars_open]
    top = scratch[2 * cars_open:3 * cars_open]
    load = scratch[3 * cars_open:4 * cars_open]
    scratch[:4 * cars_open] = 0
    one = 1
    for i in range(n):
        o, d = origins[i], destinations[i]
        best, best_new, best_rise, best_load = -1, 3, 1 << 30, 1 << 30
        for c in range(cars_open):
            if load[c] >= car_limit:
                continue
            mask = up[c] if d > o else down[c]
            new = 0
            if o != 0 and not (mask >> o) & one:
                new += 1
            if d != 0 and not (mask >> d) & one:
                new += 1
            rise = max(0, max(o, d) - top[c])
            if (new < best_new or (new == best_new and load[c] < best_load)
                    or (new == best_new and load[c] == best_load and rise < best_rise)):
                best, best_new, best_rise, best_load = c, new, rise, load[c]
        car_out[i] = best
        if best >= 0:
            bits = (one << o) | (one << d)
            if d > o:
                up[best] |= bits
            else:
                down[best] |= bits
            top[best] = max(top[best], max(o, d))
            load[best] += 1
