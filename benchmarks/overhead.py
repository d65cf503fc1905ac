#!/usr/bin/env python
"""overhead: one DFT single point through fourfold's engine vs a bare PySCF script, same settings.

Run: ``benchmarks/overhead.py [--repeats 2] [--level quick]``. The case is SP-4 [NiCl4]2- (Ni–Cl 2.27 Å) as
a triplet, so both sides do exactly one UKS SCF (a singlet would add fourfold's stability search,
which the bare script does not do). Settings come from the level (functional, basis, density fitting,
grid, convergence, D3(BJ)); both sides run on one thread (OMP and BLAS pinned before numpy loads) from
PySCF's minao guess, after one untimed warm-up each (module loading). The two runs alternate in the order
A B B A … to cancel drift in machine load;
wall and CPU seconds are summed per side. Prints the runs, then the wall ratio last (target ≤ 1.05).
"""

import os

for _name in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_name] = "1"

import argparse  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402
from ase import Atoms  # noqa: E402

from fourfold.compute.levels import get_level  # noqa: E402
from fourfold.compute.pyscf_engine import run_scf  # noqa: E402

CHARGE, SPIN2S, NI_CL_ANGSTROM = -2, 2, 2.27


def square_nicl4() -> Atoms:
    axes = np.array([[1, 0, 0], [0, 1, 0], [-1, 0, 0], [0, -1, 0]], float) * NI_CL_ANGSTROM
    return Atoms("NiCl4", positions=np.vstack([[0, 0, 0], axes]))


def through_fourfold(atoms, level, charge=CHARGE, spin2s=SPIN2S):
    result = run_scf(atoms, charge, spin2s, level, threads=1, form="restricted" if spin2s == 0 else None)
    return result.energy_hartree, result.cycles


def bare_pyscf(atoms, level, charge=CHARGE, spin2s=SPIN2S):
    from dftd3.pyscf import DFTD3Dispersion
    from pyscf import dft, gto, lib

    lib.num_threads(1)
    mol = gto.M(atom=[(s, tuple(p)) for s, p in zip(atoms.get_chemical_symbols(), atoms.positions, strict=False)],
                basis=level.basis, charge=charge, spin=spin2s, verbose=0)
    mf = dft.UKS(mol) if spin2s else dft.RKS(mol)
    if level.density_fit:
        mf = mf.density_fit()
    mf.xc = level.functional
    mf.grids.level = level.grid_level
    mf.conv_tol, mf.max_cycle = level.conv_tol, level.max_cycles
    energy = mf.kernel()
    if level.dispersion:
        energy += float(DFTD3Dispersion(mol, xc=level.functional, version=level.dispersion).kernel()[0])
    return energy, mf.cycles


def timed(function, atoms, level):
    wall, cpu = time.perf_counter(), time.process_time()
    energy, cycles = function(atoms, level)
    return energy, cycles, time.perf_counter() - wall, time.process_time() - cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=2, help="pairs of runs (order A B B A …)")
    parser.add_argument("--level", default="quick", help="a preset with method dft")
    args = parser.parse_args()
    level = get_level(args.level)
    atoms = square_nicl4()
    sides = {"fourfold": through_fourfold, "bare": bare_pyscf}
    order = []
    for pair in range(args.repeats):
        order += ["fourfold", "bare"] if pair % 2 == 0 else ["bare", "fourfold"]
    water = Atoms("OH2", positions=[[0, 0, 0], [0.76, 0.59, 0], [-0.76, 0.59, 0]])
    for side in sides.values():  # load every module and library once, untimed
        side(water, level, charge=0, spin2s=0)
    totals = {name: [0.0, 0.0] for name in sides}
    energies = {}
    print(f"SP-4 [NiCl4]2- 2S={SPIN2S}, {level.functional}/{level.basis}, grid {level.grid_level}, "
          f"density fitting {level.density_fit}, dispersion {level.dispersion}, one thread")
    print(f"{'run':<10}{'energy / Eh':>20}{'cycles':>8}{'wall s':>9}{'cpu s':>9}")
    for name in order:
        energy, cycles, wall, cpu = timed(sides[name], atoms, level)
        totals[name][0] += wall
        totals[name][1] += cpu
        energies.setdefault(name, energy)
        print(f"{name:<10}{energy:>20.8f}{cycles:>8}{wall:>9.1f}{cpu:>9.1f}")
    difference = abs(energies["fourfold"] - energies["bare"])
    print(f"same energy: |ΔE| = {difference:.1e} Eh")
    print(f"cpu ratio fourfold/bare {totals['fourfold'][1] / totals['bare'][1]:.3f}")
    print(f"wall ratio fourfold/bare {totals['fourfold'][0] / totals['bare'][0]:.3f} (target <= 1.05)")


if __name__ == "__main__":
    main()
