"""Shared test settings.

The "ci" hypothesis profile has no deadline: the first call of a compiled
(numba) kernel includes its compilation, which no per-example deadline
should count against.
"""
from hypothesis import settings

settings.register_profile("ci", deadline=None, max_examples=50)
settings.load_profile("ci")
