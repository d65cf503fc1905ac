"""One job, executed: the worker side of a study. Plain data in, plain data out.

``run_task(task, spec, parent, context)`` rebuilds the complex from the job's spec (a
``fourfold.study.jobs.JobSpec``, read only through its attributes), takes its start structure (the ideal or
path-point structure, or the parent job's result), runs the engine the spec names and returns a dict a
driver can store (no objects, no open files). It never touches the store.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from ..errors import ComputeError, NotConverged


@dataclass(frozen=True)
class JobContext:
    """Where one job writes and how it runs: its log, its orbital file (DFT jobs), its thread count, and the
    orbital file of the parent job to start the SCF from."""

    log_path: str | None = None
    chk_path: str | None = None
    threads: int = 1
    guess: str | None = None


def complex_from_spec(spec):
    from ..chem.complex import complex_explicit
    from ..chem.ligands import Ligand
    from ..chem.metals import Sourced

    custom = {}
    for name, c in spec.complex["custom_ligands"].items():
        custom[name] = Ligand(
            name=name, label=c["label"], charge=c["charge"], symbols=tuple(c["symbols"]),
            positions_angstrom=np.array(c["positions_angstrom"], dtype=float),
            f=Sourced(c["f"], "recipe"), pi_ratio=Sourced(c["pi_ratio"], "recipe"), h=Sourced(c["h"], "recipe"),
            denticity=c["denticity"], distance_angstrom=c["distance_angstrom"],
        )
    cspec = spec.complex
    ligands = [custom.get(name, name) for name in cspec["ligands"]]
    return complex_explicit(cspec["metal"], cspec["oxidation_state"], ligands, custom_ligands=custom)


def start_structure(spec, parent: dict | None):
    """The start geometry: the parent's result, else the ideal (or path-point) structure."""
    from ..geometry.builder import build, build_path_point

    cx = complex_from_spec(spec)
    if spec.is_path_point:
        atoms = build_path_point(cx, spec.trans_angle_deg, spec.isomer or None)
    else:
        atoms = build(cx, spec.arrangement, spec.isomer or None)
    if parent is not None:
        if parent.get("status") != "done":
            raise ComputeError("the parent job did not finish")
        atoms.set_positions(np.asarray(parent["positions_angstrom"], dtype=float))
    return cx, atoms


def _held_arrangement(spec) -> str:
    """Which ideal arrangement's constraint rules apply; path points near the square count as SP-4."""
    from .relax import LINEAR_ANGLE_DEG

    if not spec.is_path_point:
        return spec.arrangement
    return "SP-4" if spec.trans_angle_deg > LINEAR_ANGLE_DEG else "T-4"


def _level(engine: dict):
    from .levels import custom_level

    return custom_level(engine)


def _potential(spec, atoms, context: JobContext):
    engine = spec.engine
    if spec.method == "xtb":
        from .xtb_engine import XtbPotential

        return XtbPotential(atoms.get_chemical_symbols(), spec.charge, spec.spin2s, solvent=engine.get("solvent"),
                            spin_polarization=engine.get("spin_polarization", True), threads=context.threads)
    from .pyscf_engine import PyscfPotential

    return PyscfPotential(atoms, spec.charge, spec.spin2s, _level(engine), guess=context.guess,
                          log_path=context.log_path, threads=context.threads)


def _indices(atoms) -> dict:
    from ..geometry.shape import geometry_indices

    found = geometry_indices(atoms, [1, 2, 3, 4])
    return {"tau4": found["tau4"], "tau4_prime": found["tau4_prime"], "nearest_shape": found["nearest_shape"],
            "nearest_shape_measure": found["nearest_shape_measure"], "shape_measures": found["shape_measures"]}


def run_task(task: str, spec, parent: dict | None, context: JobContext = JobContext()) -> dict:
    """Run one job and return its result as plain data (status 'done' or 'failed' with a reason).

    ``context.chk_path``: where a DFT job saves its converged orbitals; a child job starts its SCF from its
    parent's (``context.guess``, the single point after a DFT relaxation)."""
    started = time.perf_counter()
    cx, atoms = start_structure(spec, parent)
    result = {"engine": spec.method, "warnings": []}
    if parent is not None:  # a single point is only as good as the geometry it was computed on
        result["geometry_converged"] = bool(parent.get("converged", True)) and parent.get("geometry_converged", True)
        result["warnings"] += [w for w in parent.get("warnings", []) if w not in result["warnings"]]
    try:
        if task == "single-point":
            result.update(_single_point(spec, atoms, cx, context))
        elif task == "frequencies":
            result.update(_frequencies(spec, atoms, cx, context))
            atoms = result.pop("atoms")
        else:
            result.update(_relaxation(task, spec, atoms, cx, context))
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
    if spec.method == "xtb":
        from .xtb_engine import XTB_SPIN_WARNING

        result["warnings"].append(XTB_SPIN_WARNING)
    return result


# A relaxation that geomeTRIC gives up on (e.g. "Eigenvalues did not converge" building the coordinates of
# held T-4 Ni(CO)4 at step 1) is started again this many times from a perturbed start before it is recorded
# as failed: ligand atoms moved by up to RETRY_DISPLACEMENT_ANGSTROM, donors only along their M–L axes, so a
# held arrangement stays what it was (fourfold default).
RELAX_RETRIES = 2
RETRY_DISPLACEMENT_ANGSTROM = 0.05


def _perturbed(atoms, attempt: int, donor_indices=(1, 2, 3, 4), metal_index: int = 0):
    rng = np.random.default_rng(1000 + attempt)
    positions = atoms.get_positions()
    moved = positions + rng.uniform(-RETRY_DISPLACEMENT_ANGSTROM, RETRY_DISPLACEMENT_ANGSTROM, positions.shape)
    for donor in donor_indices:
        axis = positions[donor] - positions[metal_index]
        axis /= np.linalg.norm(axis)
        moved[donor] = positions[donor] + axis * float(np.dot(moved[donor] - positions[donor], axis))
    moved[metal_index] = positions[metal_index]
    out = atoms.copy()
    out.set_positions(moved)
    return out


def _relaxation(task: str, spec, atoms, cx, context: JobContext) -> dict:
    from .relax import relax

    kind = "held" if task == "path-point" else spec.kind
    potential = _potential(spec, atoms, context)
    retried = []
    for attempt in range(RELAX_RETRIES + 1):
        start = atoms if attempt == 0 else _perturbed(atoms, attempt)
        try:
            outcome = relax(start, potential, kind, _held_arrangement(spec), max_steps=spec.max_steps,
                            log_path=context.log_path)
            break
        except NotConverged:
            raise
        except ComputeError as error:
            if attempt == RELAX_RETRIES or "geomeTRIC failed" not in str(error):
                raise
            retried.append(str(error))
    found = {"atoms": outcome.atoms, "energy_hartree": outcome.energy_hartree, "converged": outcome.converged,
             "steps": outcome.steps, "gradient_calls": outcome.gradient_calls, "message": outcome.message,
             "warnings": [f"restarted from a perturbed start after: {reason}" for reason in retried]}
    if not outcome.converged:
        found["warnings"].append(f"relaxation {outcome.message}")
    scf = getattr(potential, "last", None)
    if scf is not None:
        found.update(scf_summary(scf))
        found.update(_d_block(scf, outcome.atoms, cx))
        if context.chk_path:
            found["chkfile"] = _save_orbitals(scf, context.chk_path)
    return found


# The minimum check: a free minimum with a mode beyond hessian.IMAGINARY_THRESHOLD_CM is moved this far along
# it (largest atom displacement) and relaxed again, at most MIN_CHECK_RESTARTS times (fourfold default).
MIN_CHECK_RESTARTS = 2
MIN_CHECK_STEP_ANGSTROM = 0.1


def _hessian(spec, atoms, context: JobContext, guess):
    """Energy-independent part of a frequency job: the Hessian at ``atoms`` on the job's own level."""
    from .hessian import xtb_hessian

    if spec.method == "xtb":
        return xtb_hessian(atoms, spec.charge, spec.spin2s, solvent=spec.engine.get("solvent"),
                           threads=context.threads), None
    from .pyscf_engine import energy_hessian

    _, hessian, scf = energy_hessian(atoms, spec.charge, spec.spin2s, _level(spec.engine), guess=guess,
                                     log_path=context.log_path, threads=context.threads)
    return hessian, scf


def _frequencies(spec, atoms, cx, context: JobContext) -> dict:
    """A free minimum made a checked one: relaxed to tight criteria (default criteria leave fake 15i–19i
    modes on GFN2-xTB [NiCl4]2-, measured), its harmonic frequencies, and — while a mode is imaginary beyond
    the threshold — a step along that mode and another tight relaxation. Returns the final structure, its
    energy and frequencies, and how many restarts the check took."""
    from .hessian import IMAGINARY_THRESHOLD_CM, displace_along, harmonic_analysis, imaginary_modes
    from .relax import relax

    potential = _potential(spec, atoms, context)
    restarts = []
    for attempt in range(MIN_CHECK_RESTARTS + 1):
        outcome = relax(atoms, potential, "free", spec.arrangement, max_steps=spec.max_steps, convergence="tight",
                        log_path=context.log_path)
        atoms = outcome.atoms
        hessian, scf = _hessian(spec, atoms, context, getattr(potential, "last", None) or context.guess)
        vibrations = harmonic_analysis(atoms, hessian)
        imaginary = imaginary_modes(vibrations.frequencies_cm)
        if not len(imaginary) or attempt == MIN_CHECK_RESTARTS:
            break
        restarts.append(f"{vibrations.frequencies_cm[imaginary[0]]:.0f} cm⁻¹")
        atoms = displace_along(atoms, vibrations.modes[imaginary[0]], MIN_CHECK_STEP_ANGSTROM)
    found = {"atoms": atoms, "energy_hartree": outcome.energy_hartree, "converged": outcome.converged,
             "steps": outcome.steps, "gradient_calls": outcome.gradient_calls, "message": outcome.message,
             "frequencies_cm": [float(f) for f in vibrations.frequencies_cm], "n_imaginary": len(imaginary),
             "imaginary_threshold_cm": IMAGINARY_THRESHOLD_CM, "min_check_restarts": restarts,
             "frequency_level": "GFN2-xTB" if spec.method == "xtb" else spec.engine.get("functional", spec.method),
             "hessian_method": "finite differences of gradients" if spec.method == "xtb" else "analytic",
             "warnings": []}
    if len(imaginary):
        found["warnings"].append(f"{len(imaginary)} imaginary mode(s) beyond {IMAGINARY_THRESHOLD_CM:.0f}i cm⁻¹ "
                                 f"remain after {len(restarts)} restarts: not a minimum")
    if not outcome.converged:
        found["warnings"].append(f"relaxation {outcome.message}")
    if scf is not None:
        found.update(scf_summary(scf))
        if context.chk_path:
            found["chkfile"] = _save_orbitals(scf, context.chk_path)
    return found


def _single_point(spec, atoms, cx, context: JobContext) -> dict:
    from .pyscf_engine import run_scf

    scf = run_scf(atoms, spec.charge, spec.spin2s, _level(spec.engine), guess=context.guess,
                  log_path=context.log_path, threads=context.threads, chkfile=context.chk_path,
                  d_target=_d_target(cx, spec), neighbour_spins=(neighbour_spin(spec.spin2s),))
    found = {"energy_hartree": scf.energy_hartree, "converged": scf.converged, **scf_summary(scf)}
    if not scf.converged:
        found.update(status="failed", reason=f"SCF not converged: {scf.reason}")
        return found
    if context.chk_path:
        found["chkfile"] = str(context.chk_path)
    found.update(_d_block(scf, atoms, cx))
    if scf.broken_symmetry:
        found.update(_projected_singlet(scf, atoms, spec, context))
    return found


def neighbour_spin(spin2s: int) -> int:
    """The spin state whose density seeds one start of this state's search: one pair lower (the SP-4 triplet
    from the singlet's density), or the triplet/quartet for a singlet/doublet."""
    return spin2s - 2 if spin2s >= 2 else spin2s + 2


def _d_target(cx, spec):
    """The d configuration the ligand-field estimate gives this state (one more SCF start, and the check of
    the converged occupation); None where the state is no ideal arrangement (path points)."""
    from .dblock import target_for

    if spec.is_path_point:
        return None
    return target_for(cx, spec.arrangement, spec.spin2s, spec.isomer or None)


def _projected_singlet(bs, atoms, spec, context: JobContext) -> dict:
    """The triplet at the broken-symmetry singlet's geometry, and the singlet's Yamaguchi-projected energy."""
    from .pyscf_engine import run_scf
    from .spin_projection import projected_singlet_energy_hartree

    # one start, from the BS solution itself: the partner is the triplet of those same two unpaired electrons
    hs = run_scf(atoms, spec.charge, 2, _level(spec.engine), guess=bs, log_path=context.log_path,
                 threads=context.threads, search_starts=False)
    if not hs.converged:
        return {"projection_note": f"no projection: the triplet at this geometry did not converge ({hs.reason})"}
    return {"high_spin_energy_hartree": hs.energy_hartree, "high_spin_s2": hs.s2,
            "projected_energy_hartree": projected_singlet_energy_hartree(bs.energy_hartree, bs.s2, hs.energy_hartree,
                                                                         hs.s2)}


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
            "fit_tied_pi": fit.tied_pi, "fit_condition_number": fit.condition_number, "fit_withheld": fit.withheld,
            "fit_at_bound": list(fit.at_bound)}


def _homo_energy_hartree(scf) -> float | None:
    occupied = np.asarray(scf.mo_energy_hartree)[np.asarray(scf.mo_occ) > 0]
    return float(occupied.max()) if occupied.size else None


def scf_summary(scf) -> dict:
    """The plain-data fields of an SCF result that reports need."""
    return {"homo_energy_hartree": _homo_energy_hartree(scf), "rung": scf.rung, "cycles": scf.cycles, "s2": scf.s2,
            "s2_expected": scf.s2_expected, "spin_contaminated": scf.spin_contaminated, "broken_symmetry": scf.broken_symmetry,
            "homo_lumo_gap_hartree": scf.homo_lumo_gap_hartree, "aufbau": scf.aufbau, "scf_notes": list(scf.notes),
            "dispersion_hartree": scf.dispersion_hartree, "starts": [dict(start) for start in scf.starts],
            "start_won": scf.start_won, "spread_kj_mol": scf.spread_kj_mol,
            "right_spin_character": scf.right_spin_character, "occupation_matches": scf.occupation_matches,
            "d_occupation": None if scf.d_occupation is None else [list(row) for row in scf.d_occupation]}

