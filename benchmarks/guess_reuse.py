#!/usr/bin/env python
"""guess_reuse: SCF cycles over a spin scan of one arrangement, with density reuse vs cold starts.

Run: ``benchmarks/guess_reuse.py [--formula "[CoCl4]2-"] [--arrangement T-4] [--level quick]``. The builder's
ideal structure is computed in every allowed 2S, highest first. Cold: each state from PySCF's minao
guess. Reuse: each state seeded with the previous state's converged ScfResult (what the spin scan does
at one geometry). SCF cycles are deterministic counts (all ladder rungs, and for a singlet the RKS run
and the broken-symmetry search). Prints a table, then the cycle ratio reuse/cold last (target ≤ 0.6).
"""

import os

for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_name] = "1"

import argparse  # noqa: E402
import time  # noqa: E402

from fourfold.chem.complex import complex_from_formula  # noqa: E402
from fourfold.compute.levels import get_level  # noqa: E402
from fourfold.compute.pyscf_engine import run_scf  # noqa: E402
from fourfold.geometry.builder import build  # noqa: E402
from fourfold.units import HARTREE_KJ_MOL  # noqa: E402


def scan(atoms, charge, spins, level, reuse: bool):
    rows, previous = [], None
    for spin2s in spins:
        started = time.perf_counter()
        result = run_scf(atoms, charge, spin2s, level, guess=previous if reuse else None, threads=1)
        rows.append((spin2s, result, time.perf_counter() - started))
        previous = result if reuse and result.converged else previous
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--formula", default="[CoCl4]2-")
    parser.add_argument("--arrangement", default="T-4")
    parser.add_argument("--level", default="quick")
    args = parser.parse_args()
    level = get_level(args.level)
    cx = complex_from_formula(args.formula)
    atoms = build(cx, args.arrangement)
    spins = sorted(cx.allowed_spin2s, reverse=True)
    print(f"{args.formula} {args.arrangement}, 2S = {', '.join(map(str, spins))}, level {level.name} "
          f"({level.functional}/{level.basis}, grid {level.grid_level})")
    print(f"{'start':<7}{'2S':>3}{'cycles':>8}{'rung':>12}{'conv':>6}{'<S2>':>7}{'wall s':>8}  E − E(cold) kJ/mol")
    totals, cold_energy = {}, {}
    for mode in ("cold", "reuse"):
        totals[mode] = 0
        for spin2s, result, seconds in scan(atoms, cx.charge, spins, level, reuse=(mode == "reuse")):
            totals[mode] += result.cycles
            cold_energy.setdefault(spin2s, result.energy_hartree)
            shift = (result.energy_hartree - cold_energy[spin2s]) * HARTREE_KJ_MOL
            print(f"{mode:<7}{spin2s:>3}{result.cycles:>8}{str(result.rung):>12}{str(result.converged):>6}"
                  f"{result.s2:>7.3f}{seconds:>8.1f}  {shift:+.3f}")
    print(f"total SCF cycles, reuse / cold: {totals['reuse']} / {totals['cold']}")
    print(f"ratio {totals['reuse'] / totals['cold']:.2f} (target <= 0.6)")


if __name__ == "__main__":
    main()
