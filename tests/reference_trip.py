"""A slow, obviously correct plain-Python twin of the compiled trip model.

It follows the written model (docs/trip_model.md) literally: the car passes the
floors one by one, lets passengers off, lets waiting passengers on in arrival
order while it is below rated load, and records the route. A floor is a stop
for those who board or alight there (a full car answers no landing call). A
trip with lobby traffic, or with nobody, starts and ends at the lobby; any
other starts and ends at its lowest stop, counted once. The compiled kernel in
roundtrip/_trip_kernel.py must give exactly the same numbers.
"""
from __future__ import annotations

from dataclasses import dataclass


@dataclass
class ReferenceTrip:
    time_s: float
    stops: int                 # above the lobby
    highest: int
    lowest: int
    boarded: int
    peak_load: int
    left_behind: int
    route: list
    boarded_flags: list        # per passenger, in arrival order: True when they board


def reference_trip(passengers, flight_s, capacity, stop_overhead_s, transfer_in_s,
                   transfer_out_s) -> ReferenceTrip:
    """Time one car's round trip; ``passengers`` is a list of (origin, destination)."""
    n_levels = len(flight_s)
    boarded = left = peak = 0
    flags = [False] * len(passengers)
    calls = {"up": set(), "down": set()}
    for direction, floors in (("up", range(n_levels)), ("down", range(n_levels - 1, -1, -1))):
        mine = [i for i, (o, d) in enumerate(passengers) if (d > o) == (direction == "up") and d != o]
        in_car = []                      # destinations of those aboard
        for f in floors:
            in_car = [d for d in in_car if d != f]          # alight first
            for i in mine:                                  # then board, in arrival order
                o, d = passengers[i]
                if o != f:
                    continue
                if len(in_car) < capacity:
                    in_car.append(d)
                    calls[direction].update((o, d))        # a stop for those who ride
                    flags[i] = True
                    boarded += 1
                    peak = max(peak, len(in_car))
                else:
                    left += 1
    served = calls["up"] | calls["down"]
    terminal = 0 if (0 in served or not served) else min(served)
    route = [terminal] + sorted(f for f in calls["up"] if f > terminal)
    for f in sorted((f for f in calls["down"] if f > terminal), reverse=True):
        if f != route[-1]:
            route.append(f)
    route.append(terminal)
    flight = 0.0
    for a, b in zip(route[:-1], route[1:]):
        flight += flight_s[a][b]
    # stops above the lobby: the route's stops between its two terminal entries, and the
    # terminal floor itself when it is not the lobby
    stops = len(route) - 2 + (1 if terminal > 0 else 0)
    highest = max(served, default=0)
    time = (flight + (len(route) - 1) * stop_overhead_s + boarded * transfer_in_s
            + boarded * transfer_out_s)
    return ReferenceTrip(time, stops, highest, terminal, boarded, peak, left, route, flags)


def reference_chain(trips, flight_s, capacity, stop_overhead_s, transfer_in_s, transfer_out_s):
    """One car's trips in a chain, the written model taken literally: ``trips`` lists each
    trip's new passengers (origin, destination) in arrival order; the car is offered
    everyone waiting, those left behind earlier first, and whoever does not board waits
    for the next trip. Returns ([(trip, offered), ...], still waiting at the end)."""
    queue = []
    out = []
    for new in trips:
        queue = queue + list(new)
        ref = reference_trip(queue, flight_s, capacity, stop_overhead_s, transfer_in_s,
                             transfer_out_s)
        out.append((ref, len(queue)))
        queue = [p for p, on in zip(queue, ref.boarded_flags) if not on]
    return out, queue


def reference_rounds(rounds, cars_open, allocate, flight_s, capacity, stop_overhead_s,
                     transfer_in_s, transfer_out_s):
    """A group's rounds as batchrounds/_kernel.py describes them, taken literally.

    ``rounds`` lists each round's cars (departure order), each car its new passengers
    (origin, destination) in arrival order. For each sub-batch of ``cars_open`` cars,
    conventional control loads the queue car by car (the car's room is whoever boards
    it); ``allocate(origins, destinations, rooms)`` shares that batch's upward and then its
    downward passengers, each listed car by car, between the cars, each car's room in a
    direction being what it carries that way; every car's trip is timed, and whoever its
    car cannot take goes back to the queue in arrival order. Returns ([[(trip, offered, left), ...per car],
    ...per round], still waiting at the end).
    """
    def trip(passengers):
        return reference_trip(passengers, flight_s, capacity, stop_overhead_s, transfer_in_s,
                              transfer_out_s)

    queue = []                                  # (ticket, origin, destination)
    ticket = 0
    results = []
    for cars in rounds:
        L = len(cars)
        row = [None] * L
        for c0 in range(0, L, cars_open):
            k = min(L, c0 + cars_open) - c0
            batch, waiting, left = [], [], []
            for c in range(k):
                for o, d in cars[c0 + c]:
                    queue.append((ticket, o, d))
                    ticket += 1
                ref = trip([(o, d) for _, o, d in queue])
                boarded = [q for q, on in zip(queue, ref.boarded_flags) if on]
                rest = [q for q, on in zip(queue, ref.boarded_flags) if not on]
                batch += [(c, q) for q in boarded]
                waiting.append(len(queue))
                left.append(len(rest))
                queue = rest
            shared = []
            for going_up in (True, False):
                part = [q for c, q in batch if (q[2] > q[1]) == going_up]
                rooms = [sum(1 for c, q in batch if c == j and (q[2] > q[1]) == going_up)
                         for j in range(k)]
                if part:
                    cars_of = allocate([o for _, o, _ in part], [d for _, _, d in part], rooms)
                    shared += list(zip(part, cars_of))
            shared.sort()
            returned = []
            for c in range(k):
                mine = [q for q, a in shared if a == c]
                ref = trip([(o, d) for _, o, d in mine])
                returned += [q for q, on in zip(mine, ref.boarded_flags) if not on]
                row[c0 + c] = (ref, waiting[c], left[c] + ref.left_behind)
            queue = sorted(queue + returned)
        results.append(row)
    return results, queue
