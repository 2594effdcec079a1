"""The time-based peak simulation: a lift group over a peak period, passenger by passenger.

Passengers arrive one by one (a Poisson process per origin-destination cell of
the traffic mix); cars leave the lobby when loaded or when their lobby dwell has
run, fly their trips (:mod:`roundtrip.schedule`) and come back; allocation is
made when passengers register - by conventional control, or by destination
control with a batch rule over an allocation window or an immediate policy
(:mod:`allocation`). From one row per passenger and one per trip come waiting
time, time to destination and handling capacity, with intervals from
independent replications.

:mod:`peak.simulation` is the plain Python API, :mod:`peak._kernel` the
compiled event loop, :mod:`peak.arrivals` the arrival streams and
:mod:`peak.statistics` the figures. The model is written down in
``docs/peak_model.md``.
"""
