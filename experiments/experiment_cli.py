"""The shared command line of the experiment scripts (``python -m experiments.NAME``)."""
from __future__ import annotations

import argparse


def experiment_main(main, question: str) -> None:
    ap = argparse.ArgumentParser(description=question)
    ap.add_argument("--trials", type=int, default=None,
                    help="trials per estimate (default: adaptive, 0.5 %% intervals)")
    ap.add_argument("--seed", type=int, default=2026, help="seed of the random stream")
    ap.add_argument("--out", default=None, help="output folder")
    args = ap.parse_args()
    kwargs = {"trials": args.trials, "seed": args.seed}
    if args.out:
        kwargs["out_dir"] = args.out
    table, paths = main(**kwargs)
    print(question)
    print(table.to_string(max_rows=40))
    for p in paths:
        print(f"wrote {p}")
