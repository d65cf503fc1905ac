"""One job, executed: the worker side of a study. Plain data in, plain data out.

``run_task(task, spec, parent, log_path)`` rebuilds the complex from the job's spec, takes its start
structure (the ideal or path-point structure, or the parent job's result), runs the engine the spec names
and returns a dict a driver can store (no objects, no open files). It never touches the store.
"""

from __future__ import annotations

import time

import numpy as np

from ..errors import ComputeError, NotConverged


def complex_from_spec(spec: dict):
    from ..chem.complex import complex_explicit
    from ..chem.ligands import Ligand
    from ..chem.metals import Sourced

    custom = {}
    for name, c in spec["complex"]["custom_ligands"].items():
        custom[name] = Ligand(
            name=name, label=c["label"], charge=c["charge"], symbols=tuple(c["symbols"]),
            positions_angstrom=np.array(c["positions_angstrom"], dtype=float),
            f=Sourced(c["f"], "recipe"), pi_ratio=Sourced(c["pi_ratio"], "recipe"), h=Sourced(c["h"], "recipe"),
            denticity=c["denticity"], distance_angstrom=c["distance_angstrom"],
        )
    cspec = spec["complex"]
    ligands = [custom.get(name, name) for name in cspec["ligands"]]
    return complex_explicit(cspec["metal"], cspec["oxidation_state"], ligands, custom_ligands=custom)


def start_structure(spec: dict, parent: dict | None):
    """The start geometry: the parent's result, else the ideal (or path-point) structure."""
    from ..geometry.builder import build, build_path_point

    cx = complex_from_spec(spec)
    if spec["arrangement"] == "path":
        atoms = build_path_point(cx, spec["trans_angle_deg"], spec["isomer"] or None)
    else:
        atoms = build(cx, spec["arrangement"], spec["isomer"] or None)
    if parent is not None:
        if parent.get("status") != "done":
            raise ComputeError("the parent job did not finish")
        atoms.set_positions(np.asarray(parent["positions_angstrom"], dtype=float))
    return cx, atoms


def _held_arrangement(spec: dict, atoms) -> str:
    """Which ideal arrangement's constraint rules apply; path points near the square count as SP-4."""
    from .relax import LINEAR_ANGLE_DEG

    if spec["arrangement"] != "path":
        return spec["arrangement"]
    return "SP-4" if spec["trans_angle_deg"] > LINEAR_ANGLE_DEG else "T-4"


def _level(engine: dict):
    from .levels import custom_level

    return custom_level(engine)


def _potential(engine: dict, atoms, charge: int, spin2s: int, log_path, threads: int, guess):
    if engine["method"] == "xtb":
        from .xtb_engine import XtbPotential

        return XtbPotential(atoms.get_chemical_symbols(), charge, spin2s, solvent=engine.get("solvent"),
                            spin_polarization=engine.get("spin_polarization", True), threads=threads)
    from .pyscf_engine import PyscfPotential

    return PyscfPotential(atoms, charge, spin2s, _level(engine), guess=guess, log_path=log_path, threads=threads)


def _indices(atoms) -> dict:
    from ..geometry.shape import geometry_indices

    found = geometry_indices(atoms, [1, 2, 3, 4])
    return {"tau4": found["tau4"], "tau4_prime": found["tau4_prime"], "nearest_shape": found["nearest_shape"],
            "nearest_shape_measure": found["nearest_shape_measure"], "shape_measures": found["shape_measures"]}


def run_task(task: str, spec: dict, parent: dict | None, log_path=None, threads: int = 1, chk_path=None) -> dict:
    """Run one job and return its result as plain data (status 'done' or 'failed' with a reason).

    ``chk_path``: where a DFT job saves its converged orbitals; a child job starts its SCF from its
    parent's (the single point after a DFT relaxation)."""
    started = time.perf_counter()
    cx, atoms = start_structure(spec, parent)
    engine = spec["engine"]
    guess = parent.get("chkfile") if parent else None
    result = {"engine": engine["method"], "warnings": []}
    try:
        if task == "single-point":
            result.update(_single_point(engine, atoms, cx, spec, log_path, threads, guess, chk_path))
        else:
            result.update(_relaxation(task, engine, atoms, cx, spec, log_path, threads, guess, chk_path))
            atoms = result.pop("atoms")
    except NotConverged as error:
        last = getattr(error, "last_atoms", None)
        result.update(status="failed", reason=f"not converged: {error}", converged=False)
        atoms = last if last is not None else atoms
    result.setdefault("status", "done")
    result.update(_indices(atoms))
    result["symbols"] = atoms.get_chemical_symbols()
    result["positions_angstrom"] = atoms.get_positions().tolist()
    result["wall_seconds"] = time.perf_counter() - started
    if engine["method"] == "xtb":
        from .xtb_engine import XTB_SPIN_WARNING

        result["warnings"].append(XTB_SPIN_WARNING)
    return result


def _relaxation(task, engine, atoms, cx, spec, log_path, threads, guess, chk_path) -> dict:
    from .relax import relax

    kind = "held" if task == "path-point" else spec["kind"]
    potential = _potential(engine, atoms, cx.charge, spec["spin2s"], log_path, threads, guess)
    outcome = relax(atoms, potential, kind, _held_arrangement(spec, atoms), max_steps=spec.get("max_steps", 100),
                    log_path=log_path)
    found = {"atoms": outcome.atoms, "energy_hartree": outcome.energy_hartree, "converged": outcome.converged,
             "steps": outcome.steps, "gradient_calls": outcome.gradient_calls, "message": outcome.message}
    if not outcome.converged:
        found["warnings"] = [f"relaxation {outcome.message}"]
    scf = getattr(potential, "last", None)
    if scf is not None:
        found.update(scf_summary(scf))
        found.update(_d_block(scf, outcome.atoms, cx))
        if chk_path:
            found["chkfile"] = _save_orbitals(scf, chk_path)
    return found


def _single_point(engine, atoms, cx, spec, log_path, threads, guess, chk_path) -> dict:
    from .pyscf_engine import run_scf

    scf = run_scf(atoms, cx.charge, spec["spin2s"], _level(engine), guess=guess, log_path=log_path, threads=threads,
                  chkfile=chk_path)
    found = {"energy_hartree": scf.energy_hartree, "converged": scf.converged, **scf_summary(scf)}
    if not scf.converged:
        found.update(status="failed", reason=f"SCF not converged: {scf.reason}")
        return found
    if chk_path:
        found["chkfile"] = str(chk_path)
    found.update(_d_block(scf, atoms, cx))
    return found


def _save_orbitals(scf, chk_path) -> str:
    from pyscf import gto
    from pyscf.scf import chkfile

    chkfile.dump_scf(gto.loads(scf.mole_json), str(chk_path), scf.energy_hartree, scf.mo_energy_hartree,
                     scf.mo_coeff, scf.mo_occ)
    return str(chk_path)


def _d_block(scf, atoms, cx) -> dict:
    """Projected d levels of the converged operator and the AOM fit to them (the calculated ligand field)."""
    from ..field.fit import fit_aom
    from .dblock import d_levels_from_result

    levels = d_levels_from_result(scf, metal_index=0)
    directions = atoms.get_positions()[1:5] - atoms.get_positions()[0]
    ratios = {lig.name: lig.pi_ratio.value for lig in cx.ligands}
    fit = fit_aom(levels.matrix_cm, directions, atoms.info.get("ligand_order"), pi_ratios=ratios)
    return {"d_levels_cm": [float(x) for x in levels.relative_cm], "d_level_labels": list(levels.labels),
            "d_weights": [float(x) for x in levels.d_weights], "fitted_e_sigma_cm": fit.e_sigma_cm,
            "fitted_e_pi_cm": fit.e_pi_cm, "fitted_e_ds_cm": fit.e_ds_cm, "fit_rms_cm": fit.rms_cm,
            "fit_tied_pi": fit.tied_pi}


def scf_summary(scf) -> dict:
    """The plain-data fields of an SCF result that reports need."""
    return {"rung": scf.rung, "cycles": scf.cycles, "s2": scf.s2, "s2_expected": scf.s2_expected,
            "spin_contaminated": scf.spin_contaminated, "broken_symmetry": scf.broken_symmetry,
            "homo_lumo_gap_hartree": scf.homo_lumo_gap_hartree, "aufbau": scf.aufbau, "scf_notes": list(scf.notes),
            "dispersion_hartree": scf.dispersion_hartree}

