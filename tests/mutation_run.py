"""Mutation testing of the physics core, the rules, the sizing and the demand fixed point.

Run from the repository root, outside CI (it is slow: the whole
scope, some 5,600 mutants, takes hours on two cores; ``--sample`` runs a seeded
uniform sample and prints the survival rate with its interval)::

    pip install '.[test,mutation]'
    python tests/mutation_run.py                      # the whole scope of [tool.mutmut]
    python tests/mutation_run.py "roundtrip.passengers.*" "experiments.sizing.*"
    python tests/mutation_run.py --sample 0.05 --seed 1     # a seeded 5 % sample

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
    "allocation.registry.x__compile_policy__mutmut_7":
        "the policy compiled with numba's reference-counting runtime: the same results, "
        "only slower",
    "allocation.registry.x__unknown__mutmut_8":
        "three close matches asked for instead of one; only the first is shown",
    "allocation.sectors.x_floor_bands__mutmut_102":
        "one more row in the table of cuts, never read",
    "roundtrip.passengers.x_od_matrix__mutmut_9":
        "no float dtype asked for: the populations are floats, and u / u.sum() is anyway",
    "roundtrip.passengers.x_alias_table__mutmut_16":
        "no dtype for arange: numpy's default integer is int64 on the platforms supported",
    "roundtrip.montecarlo.x_meets_target__mutmut_5":
        "< instead of <= against the interval target: equality of two computed floats",
    "allocation.registry.xǁRuleǁallocate__mutmut_30":
        "no table for a rule without one: no such rule reads its table",
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


def sample_names(fraction: float, seed: int, env) -> list[str]:
    """A uniform random sample (``fraction`` of them, seeded) of every mutant of the scope,
    generating the mutants first when there are none yet: the whole scope is some 5,600
    mutants, hours on two cores, so a sample gives the survival rate with a binomial
    interval in tens of minutes."""
    import random
    names = sorted(n for names in results().values() for n in names)
    if not names:
        subprocess.run([sys.executable, "-m", "mutmut", "run", "no-mutant-is-called-this"],
                       env=env, check=False)
        names = sorted(n for names in results().values() for n in names)
    k = max(1, round(fraction * len(names)))
    return sorted(random.Random(seed).sample(names, k))


def main(argv: list[str]) -> int:
    import argparse
    parser = argparse.ArgumentParser(description="Mutation testing (see the module notes).")
    parser.add_argument("patterns", nargs="*", help="mutmut mutant-name patterns (fnmatch)")
    parser.add_argument("--sample", type=float, metavar="FRACTION",
                        help="run a seeded uniform sample of this fraction of the mutants")
    parser.add_argument("--seed", type=int, default=1, help="seed of the sample (default 1)")
    args = parser.parse_args(argv)
    env = dict(os.environ, NUMBA_NUM_THREADS="1")
    children = str(max(1, (os.cpu_count() or 1)))
    patterns = args.patterns
    if args.sample is not None:
        patterns = sample_names(args.sample, args.seed, env)
        print(f"a sample of {len(patterns)} mutants (seed {args.seed})")
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
    if checked:                  # Wilson 95 % interval of the rate (a sample's margin)
        z, p = 1.96, len(survived) / checked
        mid = (p + z * z / (2 * checked)) / (1 + z * z / checked)
        half = z * ((p * (1 - p) / checked + z * z / (4 * checked ** 2)) ** 0.5) / (1 + z * z / checked)
        print(f"survival rate 95 % interval (Wilson): {100 * (mid - half):.1f} - "
              f"{100 * (mid + half):.1f} %")
    print(f"\nmutants checked by a test: {checked}; killed {len(killed)}, suspicious "
          f"{len(suspicious)}, survived {len(survived)}, equivalent {len(equivalent)}; "
          f"survival rate {rate:.1f} %")
    return 0 if checked else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
