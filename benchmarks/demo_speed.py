#!/usr/bin/env python
"""demo_speed: the demo's wall time against a reference commit, side by side, and its SCF cycles.

Both sides run in fresh folders with the same interpreter and installed libraries; the reference's code
comes from a git worktree of REF (default: the commit before the 0.2.0 work) put first on PYTHONPATH, so
only fourfold's own code differs. The runs alternate A B B A (``--rounds`` repeats) to cancel drift in the
machine's load. By default each side runs its own bundled demo (what a user types); ``--recipe FILE`` runs
the same recipe on both, which is the fair test for "same ground states, energies within 0.5 kJ/mol".

Prints every run, then from the current side's store the SCF cycles per DFT single point (median, max),
the ground states of both sides, the largest energy difference of the states both computed, and last the
wall ratio current/reference (target ≤ 0.5).

Run: ``python benchmarks/demo_speed.py [--reference SHA] [--recipe FILE] [--rounds 1] [--workers 2]``.
"""

from __future__ import annotations

import argparse
import csv
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DEFAULT_REFERENCE = "d88e3ab"


def _worktree(reference: str, base: Path) -> Path:
    path = base / f"reference-{reference}"
    subprocess.run(["git", "-C", str(ROOT), "worktree", "add", "--detach", str(path), reference], check=True,
                   capture_output=True)
    return path


def _run(source: Path, out: Path, recipe: str | None, workers: int) -> float:
    env = {**os.environ, "PYTHONPATH": str(source / "driver"), "OMP_NUM_THREADS": "1"}
    command = [sys.executable, "-m", "fourfold.cli"]
    command += ["run", recipe] if recipe else ["demo"]
    command += ["--out", str(out), "--workers", str(workers), "--threads", "1", "--quiet"]
    started = time.perf_counter()
    done = subprocess.run(command, env=env, capture_output=True, text=True, cwd=out.parent)
    wall = time.perf_counter() - started
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(command)} failed ({done.returncode}): {done.stderr.strip()[-500:]}")
    return wall


def _rows(folder: Path, name: str) -> list[dict]:
    with open(folder / "tables" / f"{name}.csv", newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def _grounds(folder: Path) -> dict[str, tuple[str, str]]:
    return {r["formula"]: (r["computed_ground_arrangement"], r["computed_ground_spin2s"]) for r in _rows(folder, "summary")}


def _energies_kj_mol(folder: Path) -> dict[tuple, float]:
    return {(r["formula"], r["arrangement"], r["isomer"], r["spin2s"], r["relaxation"]): float(r["energy_hartree"])
            for r in _rows(folder, "states") if r["energy_hartree"]}


def _cycles(folder: Path) -> list[int]:
    from fourfold.pipeline import open_store

    return [int(r["cycles"]) for r in open_store(folder).results()
            if r.get("status") == "done" and r.get("engine") != "xtb" and r.get("cycles") is not None]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--reference", default=DEFAULT_REFERENCE)
    parser.add_argument("--recipe", help="run this recipe on both sides instead of each side's demo")
    parser.add_argument("--rounds", type=int, default=1, help="A B B A rounds")
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    recipe = str(Path(args.recipe).resolve()) if args.recipe else None
    base = Path(tempfile.mkdtemp(prefix="fourfold-demo-speed-"))
    sides = {"current": ROOT, "reference": _worktree(args.reference, base)}
    walls = {name: [] for name in sides}
    folders = {}
    try:
        order = []
        for _ in range(args.rounds):
            order += ["current", "reference", "reference", "current"]
        for index, name in enumerate(order):
            folder = base / f"{name}-{index}"
            folder.mkdir()
            out = folder / "study"
            walls[name].append(_run(sides[name], out, recipe, args.workers))
            folders.setdefault(name, out)
            print(f"{name}: {walls[name][-1]:.0f} s", flush=True)
        cycles = _cycles(folders["current"])
        if cycles:
            print(f"SCF cycles per DFT single point (current): median {statistics.median(cycles):.0f}, max {max(cycles)}, "
                  f"n {len(cycles)}")
        grounds = {name: _grounds(folder) for name, folder in folders.items()}
        for formula in grounds["current"]:
            print(f"{formula}: ground current {grounds['current'][formula]}, reference "
                  f"{grounds['reference'].get(formula)}")
        energies = {name: _energies_kj_mol(folder) for name, folder in folders.items()}
        common = set(energies["current"]) & set(energies["reference"])
        if common:
            from fourfold.units import HARTREE_KJ_MOL

            worst = max(abs(energies["current"][k] - energies["reference"][k]) * HARTREE_KJ_MOL for k in common)
            print(f"{len(common)} states in both; largest |ΔE| {worst:.2f} kJ/mol (absolute energies)")
        else:
            print("no state computed by both sides (different recipes): give --recipe for an energy comparison")
        ratio = sum(walls["current"]) / sum(walls["reference"])
        print(f"wall(current) / wall(reference) = {ratio:.2f}")
    finally:
        subprocess.run(["git", "-C", str(ROOT), "worktree", "remove", "--force", str(sides["reference"])],
                       capture_output=True)


if __name__ == "__main__":
    main()
