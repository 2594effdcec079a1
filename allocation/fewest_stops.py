"""`fewest-stops`: a capacity-aware greedy destination allocation."""
from __future__ import annotations

import numpy as np
from numba import njit

from .ordering import all_at_lobby
from .registry import register


@register(
    "fewest-stops",
    summary="Each passenger, in order of arrival, is given the car to which they add the "
            "fewest new stops; on a tie, the lighter car, then the car whose highest floor "
            "rises least. No car takes more than its room (its share of the batch), so all "
            "leave with the loads the engine gives them.",
    source="Greedy stop-minimising hall-call allocation, the simplest destination-control "
           "heuristic (common practice).",
    default=True, peak=True)
def allocate_fewest_stops(origins, destinations, cars, timing, table, scratch, car_out):
    """New stops of a passenger in a car: their origin (the lobby is always a stop) and
    destination floors that the car does not yet serve in the passenger's direction,
    counting the stops it is already due to make (the car view's masks). A car is
    open to a passenger while it has room; its load is what is committed to it plus
    what it takes from this batch.

    Ties go to the lighter car before the smaller rise of the reversal floor: the
    other order lets a loaded car win every tie against an empty one (an empty
    car's reversal floor rises the whole way), so the cars fill one after another
    in arrival order and the rule collapses into conventional control.
    """
    if cars.shape[0] <= 62 and all_at_lobby(origins):
        fewest_stops_at_lobby(destinations, cars, scratch, car_out)
        return
    fewest_stops_in_order(origins, destinations, cars, scratch, car_out)


@njit(cache=True)
def fewest_stops_in_order(origins, destinations, cars, scratch, car_out):
    """The rule as stated: each passenger in arrival order, every car with room weighed."""
    n = origins.shape[0]
    k = cars.shape[0]
    # car c's up and down stop masks (bit f for floor f), highest floor, load (committed
    # plus taken from this batch) and room left, at scratch[UP + c] ... (offsets, not slices)
    UP, DOWN, TOP, LOAD, LEFT = 0, k, 2 * k, 3 * k, 4 * k
    one = 1
    for c in range(k):
        scratch[UP + c] = cars[c]["up_stops"]
        scratch[DOWN + c] = cars[c]["down_stops"]
        scratch[TOP + c] = 0
        both = scratch[UP + c] | scratch[DOWN + c]
        if both != 0:                 # the highest floor it is due to stop at
            for f in range(64):
                if (both >> f) & one:
                    scratch[TOP + c] = f
        scratch[LOAD + c] = cars[c]["load"]
        scratch[LEFT + c] = cars[c]["room"]
    for i in range(n):
        o, d = origins[i], destinations[i]
        best, best_new, best_rise, best_load = -1, 3, 1 << 30, 1 << 30
        for c in range(k):
            if scratch[LEFT + c] <= 0:
                continue
            mask = scratch[UP + c] if d > o else scratch[DOWN + c]
            new = 0
            if o != 0 and not (mask >> o) & one:
                new += 1
            if d != 0 and not (mask >> d) & one:
                new += 1
            rise = max(0, max(o, d) - scratch[TOP + c])
            load = scratch[LOAD + c]
            if (new < best_new or (new == best_new and load < best_load)
                    or (new == best_new and load == best_load and rise < best_rise)):
                best, best_new, best_rise, best_load = c, new, rise, load
        car_out[i] = best
        if best >= 0:
            bits = (one << o) | (one << d)
            if d > o:
                scratch[UP + best] |= bits
            else:
                scratch[DOWN + best] |= bits
            scratch[TOP + best] = max(scratch[TOP + best], max(o, d))
            scratch[LOAD + best] += 1
            scratch[LEFT + best] -= 1


@njit(cache=True, inline="always")
def fewest_stops_at_lobby(destinations, cars, scratch, car_out):
    """The same allocation as :func:`fewest_stops_in_order` for a batch boarding at the
    lobby (and at most 62 cars open).

    With every origin at the lobby a passenger adds no stop to a car that already
    stops at their floor and one stop to any other, and a car already stopping there
    rises no higher. Cars that are due to stop nowhere yet (as in the round-trip
    Monte Carlo), few enough, go to :func:`fewest_stops_from_empty`; any others to
    :func:`fewest_stops_promised`.
    """
    if not fewest_stops_from_empty(destinations, cars, scratch, car_out):
        fewest_stops_promised(destinations, cars, scratch, car_out)


#: Most cars open for :func:`fewest_stops_from_empty` (one byte of a 64-bit word each).
PACKED_CARS = 8


@njit(cache=True, inline="always")
def _byte(word, c):
    """Byte c of the uint64 ``word``, as an int64."""
    return np.int64((word >> np.uint64(8 * c)) & np.uint64(255))


@njit(cache=True, inline="always")
def _one_in_byte(c):
    return np.uint64(1) << np.uint64(8 * c)


@njit(cache=True, inline="always")
def fewest_stops_from_empty(destinations, cars, scratch, car_out):
    """`fewest-stops` at the lobby for at most :data:`PACKED_CARS` cars due to stop
    nowhere yet, each with load + room below 256; returns False, having written
    nothing, for any other cars.

    Each floor then has at most one car with room that stops there, its *owner*
    (``scratch[f]``, -1 for none): a passenger for an owned floor takes its owner
    (no other car can beat a car that adds no stop), and only a passenger for a
    floor nobody owns weighs the cars, on (load, rise, car number) since every car
    adds one stop, and the car chosen owns the floor from then on. When a car is
    full its floors have no owner. The cars' loads, rooms left and highest floors
    are kept one byte per car in three 64-bit words, so the loop over passengers
    reads no car state from memory.
    """
    n = destinations.shape[0]
    k = cars.shape[0]
    if k > PACKED_CARS:
        return False
    loads = np.uint64(0)                      # byte c: car c's load
    left = np.uint64(0)                       # byte c: its room left
    tops = np.uint64(0)                       # byte c: the highest floor it stops at
    open_cars = 0                             # bit c: car c has room left
    for c in range(k):
        if cars[c]["up_stops"] != 0 or cars[c]["down_stops"] != 0 or not (
                0 <= cars[c]["load"] and 0 <= cars[c]["room"]
                and cars[c]["load"] + cars[c]["room"] < 256):
            return False
        loads |= np.uint64(cars[c]["load"]) << np.uint64(8 * c)
        left |= np.uint64(cars[c]["room"]) << np.uint64(8 * c)
        if cars[c]["room"] > 0:
            open_cars |= 1 << c
    OWNER, FLOORS = 0, 65                     # owner of floor f; floors car c stops at
    for f in range(65):
        scratch[OWNER + f] = -1
    for c in range(k):
        scratch[FLOORS + c] = 0
    never = np.int64(1) << 62
    for i in range(n):
        d = destinations[i]
        car = scratch[OWNER + d]
        if car < 0:                           # nobody owns d: weigh the cars with room
            key = never
            for c in range(PACKED_CARS):          # a fixed count: unrolled, no loop branch
                kc = (_byte(loads, c) << 12) | (max(0, d - _byte(tops, c)) << 6) | c
                key = min(key, kc if (open_cars >> c) & 1 else never)
            if key == never:
                car_out[i] = -1
                continue
            car = key & 63
            tops += np.uint64(max(0, d - _byte(tops, car))) << np.uint64(8 * car)
            scratch[OWNER + d] = car
            scratch[FLOORS + car] |= np.int64(1) << d
        car_out[i] = car
        loads += _one_in_byte(car)
        left -= _one_in_byte(car)
        if _byte(left, car) == 0:             # full: its floors have no owner
            open_cars &= ~(1 << car)
            floors = scratch[FLOORS + car]
            for f in range(_byte(tops, car) + 1):
                scratch[OWNER + f] = -1 if (floors >> f) & 1 else scratch[OWNER + f]
    return True


@njit(cache=True, inline="always")
def fewest_stops_promised(destinations, cars, scratch, car_out):
    """`fewest-stops` at the lobby for any cars (at most 62), stops already promised
    included.

    The rule's order of preference, (new stops, load, rise, car
    number), is then one integer per car, and each passenger takes the car of the
    least (the cars weighed without a branch). Most passengers go to a floor that
    exactly one car with room already serves, and no other car can beat it (it adds
    no stop): ``scratch[f]`` keeps that car for floor f (-1 when none or several), so
    they are placed at once.
    """
    n = destinations.shape[0]
    k = cars.shape[0]
    ONLY, UP, LOAD, LEFT, TOP = 0, 130, 130 + k, 130 + 2 * k, 130 + 3 * k
    for f in range(65):
        scratch[ONLY + f] = -1
    for c in range(k):
        up = np.int64(cars[c]["up_stops"])
        both = up | np.int64(cars[c]["down_stops"])
        top = 0
        f = 0
        while both != 0:                       # the highest floor it is due to stop at
            if both & 1:
                top = f
            both >>= 1
            f += 1
        scratch[UP + c] = up
        scratch[TOP + c] = top
        scratch[LOAD + c] = cars[c]["load"]
        scratch[LEFT + c] = cars[c]["room"]
    never = np.int64(1) << 62
    for i in range(n):
        d = destinations[i]
        best = scratch[ONLY + d]
        if best < 0:
            key = never
            served = 0
            for c in range(k):
                stops_there = (scratch[UP + c] >> d) & 1
                rise = max(0, d - scratch[TOP + c]) * (1 - stops_there)
                kc = ((1 - stops_there) << 40) | (scratch[LOAD + c] << 12) | (rise << 6) | c
                open_ = scratch[LEFT + c] > 0
                key = min(key, kc if open_ else never)
                served += stops_there & open_
            if key == never:
                car_out[i] = -1
                continue
            best = key & 63
            if ((key >> 40) & 1) == 1:             # a new stop at d for that car
                scratch[UP + best] |= np.int64(1) << d
                scratch[TOP + best] = max(scratch[TOP + best], d)
                served += 1
            if served == 1:                         # now the one car with room at d
                scratch[ONLY + d] = best
        car_out[i] = best
        scratch[LOAD + best] += 1
        scratch[LEFT + best] -= 1
        if scratch[LEFT + best] == 0:               # full: its floors look again
            for f in range(scratch[TOP + best] + 1):
                if scratch[ONLY + f] == best:
                    scratch[ONLY + f] = -1
