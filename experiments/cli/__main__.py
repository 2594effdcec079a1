"""`python -m experiments.cli`: the same as the `liftsort` command."""
import sys

from . import main

sys.exit(main())
