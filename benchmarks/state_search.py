#!/usr/bin/env python
"""state_search: the state search's CPU cost against a single SCF start, on the demo's single points.

Takes every DFT single point of a finished study folder (default: runs the bundled demo first), and at
each one's geometry runs, side by side in one process, (a) the default start alone (``search_starts``
False: what 0.1.0 did) and (b) the search a job runs (default, Hückel guess, the neighbouring spin state's
density, the d-configuration start, stability analysis of every open shell). Prints per state the CPU
seconds and SCF cycles of both, how far the search went below the single start (kJ/mol) and which start
won, then the total CPU ratio search/single.

Run: ``python benchmarks/state_search.py [--study FOLDER] [--formula F ...]``.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path

from ase import Atoms

from fourfold.compute import pyscf_engine as engine
from fourfold.compute.levels import custom_level
from fourfold.compute.tasks import _d_target, complex_from_spec, neighbour_spin
from fourfold.pipeline import RunOptions, open_store, run_pipeline
from fourfold.study.jobs import JobSpec
from fourfold.study.recipe import load_recipe
from fourfold.units import HARTREE_KJ_MOL

DEMO = Path(__file__).resolve().parents[1] / "driver" / "fourfold" / "recipes" / "demo.toml"


def _single_points(folder: Path, formulas: set[str]) -> list[dict]:
    rows = [r for r in open_store(folder).results()
            if r.get("status") == "done" and r.get("engine") == "dft" and r.get("starts")]
    return [r for r in rows if not formulas or r["spec"]["formula"] in formulas]


def _timed_scf(*args, **kwargs):
    """(ScfResult, CPU seconds of this process)."""
    cpu = time.process_time()
    result = engine.run_scf(*args, **kwargs)
    return result, time.process_time() - cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--study", help="a finished study folder (default: run the demo into a temporary one)")
    parser.add_argument("--formula", action="append", default=[], help="only these complexes")
    args = parser.parse_args()
    folder = Path(args.study) if args.study else Path(tempfile.mkdtemp(prefix="fourfold-search-")) / "demo"
    if not args.study:
        run_pipeline(load_recipe(DEMO), RunOptions(folder, workers=1, threads=1))
    totals = {"single": 0.0, "search": 0.0}
    for row in _single_points(folder, set(args.formula)):
        spec = row["spec"]
        job = JobSpec.from_dict(spec)
        level = custom_level(spec["engine"])
        cx = complex_from_spec(job)
        atoms = Atoms(row["symbols"], positions=row["positions_angstrom"])
        single, single_cpu = _timed_scf(atoms, cx.charge, job.spin2s, level, search_starts=False)
        found, search_cpu = _timed_scf(atoms, cx.charge, job.spin2s, level, d_target=_d_target(cx, job),
                                       neighbour_spins=(neighbour_spin(job.spin2s),))
        totals["single"] += single_cpu
        totals["search"] += search_cpu
        lower = (single.energy_hartree - found.energy_hartree) * HARTREE_KJ_MOL
        print(f"{spec['formula']:16s} {spec['arrangement']} {spec.get('isomer') or '':5s} 2S={spec['spin2s']}: "
              f"single {single_cpu:6.0f} s CPU {single.cycles:3d} cycles; search {search_cpu:6.0f} s CPU "
              f"{found.cycles:3d} cycles, {search_cpu / single_cpu:4.1f}x; search lower by {lower:6.2f} kJ/mol, "
              f"won by '{found.start_won}' of {len(found.starts)} starts", flush=True)
    if totals["single"]:
        print(f"CPU search/single = {totals['search'] / totals['single']:.2f} "
              f"({totals['search']:.0f} s against {totals['single']:.0f} s); folder {folder}")


if __name__ == "__main__":
    main()
