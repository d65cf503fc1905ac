#!/usr/bin/env python
"""observed_score: the verdict against observed complexes (data/observed.toml), at a level, with its score.

Runs every available observed complex (or ``--names``) as one study through the pipeline: free relaxations
from every arrangement and spin, frequencies off (the verdict is on electronic energies). Prints per complex
the observed and the computed ground state (shape where the free minimum ended, 2S) and the mean M–L
distance against the observed one, then the score on all entries and on those no default was tuned on,
and the date. ``--level standard --names NiCl4,PdCl4,ZnCl4`` is the M–L distance check at the DFT
geometry level (hours on two cores).

Run: ``python benchmarks/observed_score.py --level quick [--workers 2] [--out DIR]``.
"""

from __future__ import annotations

import argparse
import datetime
import tempfile
from pathlib import Path

import numpy as np

from fourfold.pipeline import RunOptions, run_pipeline
from fourfold.study.observed import available
from fourfold.study.recipe import parse_recipe


def _recipe(entries, level: str) -> str:
    complexes = "".join(f'\n[[complex]]\nformula = "{e.formula}"\n' for e in entries)
    return (f'title = "observed complexes at {level}"\nlevel = "{level}"\nrelaxations = ["free"]\n'
            f"frequencies = false\n{complexes}")


def _mean_ml_angstrom(record) -> float | None:
    if record is None or record.structure is None:
        return None
    positions = np.asarray(record.structure[1], dtype=float)
    return float(np.linalg.norm(positions[1:5] - positions[0], axis=1).mean())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--level", default="quick")
    parser.add_argument("--names", help="comma-separated entry names (default: every available entry)")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--out", help="study folder (default: a new temporary one); rerunning resumes")
    args = parser.parse_args()
    names = set(args.names.split(",")) if args.names else None
    entries = [e for e in available() if names is None or e.name in names]
    study = parse_recipe(_recipe(entries, args.level), "observed.toml")
    out = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="fourfold-observed-"))
    outcome = run_pipeline(study, RunOptions(out, workers=args.workers, threads=1))
    right, untouched, untouched_right = 0, 0, 0
    for entry, c in zip(entries, outcome.comparison.complexes, strict=True):
        g = c.computed_ground
        found = None if g is None else (g.ended_as, g.spin2s)
        ok = found == (entry.arrangement, entry.spin2s)
        right += ok
        if not entry.used_in_calibration:
            untouched += 1
            untouched_right += ok
        observed_ml = np.mean([d for _, d in entry.distances_angstrom]) if entry.distances_angstrom else None
        computed_ml = _mean_ml_angstrom(g)
        distance = ("" if observed_ml is None or computed_ml is None
                    else f"  M–L {computed_ml:.3f} Å (observed {observed_ml:.3f}, {computed_ml - observed_ml:+.3f})")
        print(f"{'ok ' if ok else 'NO '} {entry.formula:18s} observed {entry.arrangement} 2S={entry.spin2s}; "
              f"computed {found} {'' if c.complete else '(incomplete)'}{distance}", flush=True)
    print(f"{datetime.date.today()} level {args.level}: {right}/{len(entries)} right "
          f"({untouched_right}/{untouched} on entries no default was tuned on); folder {out}")


if __name__ == "__main__":
    main()
