"""Allocation rules: which car each passenger of a batch is given to.

A rule sees one batch of passengers (origin floor, destination floor, listed in
arrival order) and the cars open to allocation (identical cars of one rated
load); it returns, for each passenger, the index of their car, or -1 when no
car can take them. A rule knows nothing of the simulation around it: the Monte
Carlo engine samples the batches and times each car's trip; the rule only
groups passengers.

Every rule is one function with the same signature, registered once in
:mod:`allocation.registry`; the registry drives the command line's choices,
the documentation table and the tests.
"""
