"""A slow, obviously correct plain-Python twin of the compiled trip model.

It follows the written model (docs/trip_model.md) literally: the car passes the
floors one by one, lets passengers off, lets waiting passengers on in arrival
order while it is below rated load, and records the route. The compiled kernel
in roundtrip/_trip_kernel.py must give exactly the same numbers.
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


def reference_trip(passengers, flight_s, capacity, stop_overhead_s, transfer_in_s,
                   transfer_out_s) -> ReferenceTrip:
    """Time one car's round trip; ``passengers`` is a list of (origin, destination)."""
    n_levels = len(flight_s)
    up = [(o, d) for o, d in passengers if d > o]
    down = [(o, d) for o, d in passengers if d < o]
    boarded = left = peak = 0
    lobby_traffic = False
    calls = {"up": set(), "down": set()}
    for direction, group, floors in (("up", up, range(n_levels)),
                                     ("down", down, range(n_levels - 1, -1, -1))):
        in_car = []                      # destinations of those aboard
        for f in floors:
            in_car = [d for d in in_car if d != f]          # alight first
            for o, d in group:                              # then board, in arrival order
                if o != f:
                    continue
                calls[direction].add(o)
                if o == 0:
                    lobby_traffic = True
                if len(in_car) < capacity:
                    in_car.append(d)
                    calls[direction].add(d)
                    boarded += 1
                    peak = max(peak, len(in_car))
                    if d == 0:
                        lobby_traffic = True
                else:
                    left += 1
    route = [0] + sorted(f for f in calls["up"] if f > 0)
    for f in sorted((f for f in calls["down"] if f > 0), reverse=True):
        if f != route[-1]:
            route.append(f)
    route.append(0)
    flight = 0.0
    for a, b in zip(route[:-1], route[1:]):
        flight += flight_s[a][b]
    stops = len(route) - 2
    served = [f for f in calls["up"] | calls["down"] if f > 0]
    highest = max(served, default=0)
    lowest = 0 if (lobby_traffic or not served) else min(served)
    time = flight + (stops + 1) * stop_overhead_s + boarded * transfer_in_s + boarded * transfer_out_s
    return ReferenceTrip(time, stops, highest, lowest, boarded, peak, left, route)
