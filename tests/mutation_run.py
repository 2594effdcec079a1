"""Mutation testing of the physics core, the rules, the sizing and the demand fixed point.

Run from the repository root, outside CI (it is slow: tens of minutes for the whole
scope on two cores)::

    pip install '.[test,mutation]'
    python tests/mutation_run.py                      # the whole scope of [tool.mutmut]
    python tests/mutation_run.py "roundtrip.passengers.*" "experiments.sizing.*"

It drives mutmut (configuration in ``pyproject.toml``, ``[tool.mutmut]``): mutmut copies
``roundtrip/``, ``allocation/`` and ``experiments/`` into ``mutants/``, mutates the
functions of ``roundtrip/``, ``allocation/`` and ``experiments/sizing.py`` (the demand
fixed point is ``roundtrip.montecarlo.simulate_demand``), and for each mutant runs the
tests that call the mutated function (the slow end-to-end, chart and browser tests are
left out of the selection: they check plumbing, not numbers). Arguments are mutmut's
mutant-name patterns (fnmatch), to run part of the scope.

What mutmut does not mutate: functions carrying a decorator other than
``staticmethod``/``classmethod``, hence none of the numba kernels (``@njit``) and none of
the registered rule bodies (``@register``), and no module-level constants such as the
de Bruijn table. Those are guarded by the exact checks against the plain trip twin and
the rules written out by hand in the tests (and by hand-planted bugs). The kernels stay
compiled (numba's JIT on): a mutant of plain Python code needs no recompilation, and
the statistical tests keep their speed. Workers are forked from mutmut's fork server
(``process_isolation = "forkserver"``), which has imported the tests but run no kernel:
a worker forked from a process whose numba thread pool has run dies on SIGTERM at its
first parallel kernel (mutmut calls that "suspicious"). ``NUMBA_NUM_THREADS=1`` keeps
each worker to one core.

Prints every surviving mutant (with ``mutmut show NAME`` its diff), the ones no test
reaches, and the survival rate: survivors / mutants checked by at least one test,
equivalent mutants (listed below, each with why) left out of the rate. "Suspicious"
mutants are those whose test run ended on a signal (not a pass); they are counted with
the killed ones and their number printed.
"""
from __future__ import annotations

import os
import subprocess
import sys
from collections import defaultdict

#: Mutants that cannot change any result, with the reason (left out of the rate).
EQUIVALENT = {
}


def results() -> dict[str, list[str]]:
    """mutmut's verdict for every mutant: {status: [names]}."""
    out = subprocess.run([sys.executable, "-m", "mutmut", "results", "--all", "true"],
                         capture_output=True, text=True, check=True).stdout
    by_status = defaultdict(list)
    for line in out.splitlines():
        name, sep, status = line.strip().rpartition(": ")
        if sep:
            by_status[status].append(name)
    return by_status


def main(patterns: list[str]) -> int:
    env = dict(os.environ, NUMBA_NUM_THREADS="1")
    children = str(max(1, (os.cpu_count() or 1)))
    run = subprocess.run([sys.executable, "-m", "mutmut", "run", "--max-children", children,
                          *patterns], env=env, check=False)
    if run.returncode != 0:
        print(f"\nmutmut run failed (exit status {run.returncode}): no survival rate",
              file=sys.stderr)
        return run.returncode
    by_status = results()
    if patterns:
        import fnmatch
        by_status = {s: [n for n in names if any(fnmatch.fnmatch(n, p) for p in patterns)]
                     for s, names in by_status.items()}
    survived = [n for n in by_status.get("survived", []) if n not in EQUIVALENT]
    equivalent = [n for n in by_status.get("survived", []) if n in EQUIVALENT]
    killed = by_status.get("killed", []) + by_status.get("timeout", [])
    suspicious = by_status.get("suspicious", [])
    untested = by_status.get("no tests", [])
    checked = len(killed) + len(suspicious) + len(survived)
    print("\nsurviving mutants (`mutmut show NAME` for the diff):")
    for name in survived:
        print(f"    {name}")
    print("\nequivalent mutants (not counted):")
    for name in equivalent:
        print(f"    {name}: {EQUIVALENT[name]}")
    print(f"\nno test reaches: {len(untested)}")
    for name in untested:
        print(f"    {name}")
    print(f"\nsuspicious (the test run ended on a signal): {len(suspicious)}")
    rate = 100.0 * len(survived) / checked if checked else 0.0
    print(f"\nmutants checked by a test: {checked}; killed {len(killed)}, suspicious "
          f"{len(suspicious)}, survived {len(survived)}, equivalent {len(equivalent)}; "
          f"survival rate {rate:.1f} %")
    return 0 if checked else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
