#!/usr/bin/env python
"""workers: wall time of one study with different worker/thread settings, measured side by side.

Run: ``benchmarks/workers.py [--recipe recipes/demo.toml] [--level screen]``. Each setting runs the same
recipe into a fresh folder (nothing reused between settings); the settings alternate A B B A so drift in
machine load cancels. Settings: 2 workers × 1 thread (one job per core) and 1 worker × 2 threads (one job
using both cores). Prints each run, then the ratio of their summed wall times last.
The default overrides the recipe's level to `screen` so the benchmark takes minutes; pass
`--level quick` to time the demo as shipped.
"""

import argparse
import tempfile
import time
from pathlib import Path

from fourfold.pipeline import RunOptions, run_pipeline
from fourfold.study.recipe import load_recipe

SETTINGS = {"2 workers x 1 thread": (2, 1), "1 worker x 2 threads": (1, 2)}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--recipe", default=str(Path(__file__).resolve().parents[1] / "recipes" / "demo.toml"))
    parser.add_argument("--level", default="screen", help="level to run the recipe at (default screen)")
    parser.add_argument("--rounds", type=int, default=1, help="A B B A rounds")
    args = parser.parse_args()
    study = load_recipe(args.recipe)
    study = study.with_level(args.level)
    totals = {name: 0.0 for name in SETTINGS}
    order = []
    for _ in range(args.rounds):
        order += list(SETTINGS) + list(SETTINGS)[::-1]
    for name in order:
        workers, threads = SETTINGS[name]
        with tempfile.TemporaryDirectory(prefix="fourfold-bench-") as folder:
            started = time.perf_counter()
            summary = run_pipeline(study, RunOptions(folder, workers=workers, threads=threads)).summary
            wall = time.perf_counter() - started
        totals[name] += wall
        print(f"{name}: {summary.total} jobs ({summary.failed} failed) in {wall:.1f} s", flush=True)
    a, b = SETTINGS
    print(f"wall({b}) / wall({a}) = {totals[b] / totals[a]:.2f}  (above 1: one job per core is faster)")


if __name__ == "__main__":
    main()
