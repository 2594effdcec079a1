"""`python -m experiments.cli`: the same as the `liftsort` command."""
from . import entry

entry()
