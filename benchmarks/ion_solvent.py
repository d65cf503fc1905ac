#!/usr/bin/env python
"""ion_solvent: what a continuum solvent costs and changes for the demo's ions at the `quick` level.

For each complex of recipes/demo.toml: the GFN2-xTB held structures of its T-4 and SP-4 states (one
spin each: T-4 at the highest 2S, SP-4 at the lowest), then `quick` single points in the gas phase and
with C-PCM (acetonitrile), alternating gas/solvent so machine drift cancels. Prints per complex the CPU
seconds, ΔE(SP-4 − T-4) in both media and the HOMO energies (a positive HOMO in the gas phase marks an
unbound electron), then the CPU ratio solvent/gas over all single points last.

Run: ``python benchmarks/ion_solvent.py [--solvent acetonitrile]``.
"""

from __future__ import annotations

import argparse
import dataclasses
import time
from importlib import resources

import numpy as np

from fourfold.compute.levels import get_level
from fourfold.compute.pyscf_engine import run_scf
from fourfold.compute.relax import relax
from fourfold.compute.threads import thread_limits
from fourfold.compute.xtb_engine import XtbPotential
from fourfold.geometry.builder import build
from fourfold.geometry.isomers import isomers
from fourfold.study.recipe import parse_recipe
from fourfold.units import HARTREE_EV, HARTREE_KJ_MOL


def _xtb_structure(cx, arrangement: str, spin2s: int):
    isomer = isomers(tuple(lig.name for lig in cx.ligands), arrangement)[0]
    atoms = build(cx, arrangement, isomer)
    potential = XtbPotential(atoms.get_chemical_symbols(), cx.charge, spin2s, spin_polarization=True)
    return relax(atoms, potential, "held", arrangement).atoms


def _homo_hartree(result) -> float:
    return float(np.asarray(result.mo_energy_hartree)[np.asarray(result.mo_occ) > 0].max())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--solvent", default="acetonitrile")
    args = parser.parse_args()
    text = resources.files("fourfold").joinpath("recipes/demo.toml").read_text(encoding="utf-8")
    study = parse_recipe(text, "demo.toml")
    gas = get_level("quick")
    media = {"gas": gas, "solvent": dataclasses.replace(gas, solvent=args.solvent)}
    cpu = {"gas": 0.0, "solvent": 0.0}
    with thread_limits(1):
        for entry in study.complexes:
            cx = entry.complex
            states = {"T-4": max(entry.spins), "SP-4": min(entry.spins)}
            structures = {a: _xtb_structure(cx, a, s) for a, s in states.items()}
            energies, homos = {}, {}
            order = ["gas", "solvent", "solvent", "gas"]  # A B B A over the two states
            for arrangement, medium in zip(["T-4", "T-4", "SP-4", "SP-4"], order, strict=False):
                started = time.process_time()
                result = run_scf(structures[arrangement], cx.charge, states[arrangement], media[medium])
                cpu[medium] += time.process_time() - started
                energies[(arrangement, medium)] = result.energy_hartree
                homos[(arrangement, medium)] = _homo_hartree(result)
            for medium in media:
                delta = (energies[("SP-4", medium)] - energies[("T-4", medium)]) * HARTREE_KJ_MOL
                homo = ", ".join(f"{a} {homos[(a, medium)] * HARTREE_EV:+.2f} eV" for a in states)
                print(f"{cx.formula:16s} {medium:8s} ΔE(SP-4 − T-4) {delta:+8.1f} kJ/mol   HOMO {homo}", flush=True)
    print(f"CPU gas {cpu['gas']:.0f} s, solvent {cpu['solvent']:.0f} s")
    print(f"CPU ratio solvent/gas = {cpu['solvent'] / cpu['gas']:.2f}")


if __name__ == "__main__":
    main()
