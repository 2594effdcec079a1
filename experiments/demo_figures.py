"""Regenerate figures/: the demo building's charts and the numbers behind them.

Run: ``python -m experiments.demo_figures [--out figures] [--seed 2026]``

It runs the whole job on the invented demo building (as ``liftsort demo``) in a
temporary folder and copies the charts (PNG and SVG) and sweep.csv into the
figures folder; the HTML report itself is not kept there.
"""
from __future__ import annotations

import argparse
import shutil
import tempfile
from pathlib import Path


def main(out_dir="figures", seed: int = 2026) -> list[Path]:
    from roundtrip.inputfile import load_scenario

    from .data import demo_building_path
    from .report_job import run_job

    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        path = demo_building_path()
        run_job(load_scenario(path), path, Path(tmp), seed=seed)
        written = []
        for f in sorted(Path(tmp).iterdir()):
            if f.suffix in (".png", ".svg", ".csv"):
                shutil.copyfile(f, out / f.name)
                written.append(out / f.name)
    return written


if __name__ == "__main__":
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--out", default="figures")
    ap.add_argument("--seed", type=int, default=2026)
    a = ap.parse_args()
    for p in main(a.out, a.seed):
        print(f"wrote {p}")
