"""The round-trip Monte Carlo of a lift group: each round's passengers allocated as one batch.

A trial is one round of the group: the passengers arriving during it form a
batch, an allocation rule (:mod:`allocation`) shares it between the cars open
to allocation, and each car's trip is timed by the trip model
(:mod:`roundtrip.schedule`). Every rule runs on the very same batches (common
random numbers), so their differences carry paired intervals.

The batch is known in full before any car leaves, so with every car open this
is the ideal bound of destination grouping; the time-based peak simulation
(:mod:`peak`) gives the realistic figures.
"""
