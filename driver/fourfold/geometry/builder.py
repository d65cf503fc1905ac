"""Ideal structures: ligand fragments placed along the M–L axes of an arrangement, as ase.Atoms.

Atom order: the metal (index 0), the four donors in site order (indices 1–4), then the other ligand atoms
ligand by ligand. ``atoms.info`` carries formula, charge, arrangement, isomer and the donor indices, so
every later step (relaxation constraints, shape indices, reports) can find them.
"""

from __future__ import annotations

import numpy as np

from ..chem.complex import Complex
from ..chem.ligands import Ligand, covalent_radius_angstrom
from ..errors import InputError
from .isomers import Isomer, isomers
from .polyhedra import ARRANGEMENTS, d2d_path, unit_vectors

CLASH_FACTOR = 0.8  # non-bonded atoms closer than 0.8 × (sum of covalent radii) count as a clash
_ROTATION_STEPS = 24  # trial orientations of each fragment about its M–L axis


def ml_distance_angstrom(cx: Complex, ligand: Ligand) -> float:
    """Start M–L distance: the ligand's override, else the sum of Pyykkö–Atsumi single-bond radii."""
    if ligand.distance_angstrom is not None:
        return float(ligand.distance_angstrom)
    return cx.metal.radius_angstrom + covalent_radius_angstrom(ligand.donor)


def isomer_by_label(cx: Complex, arrangement: str, label: str | None) -> Isomer:
    """The isomer of ``cx`` on ``arrangement`` with this label ('' or None when there is only one)."""
    found = isomers(tuple(lig.name for lig in cx.ligands), arrangement)
    if label in (None, "") and len(found) == 1:
        return found[0]
    for isomer in found:
        if isomer.label == label:
            return isomer
    labels = ", ".join(repr(i.label) for i in found)
    raise InputError(f"{cx.formula} has no {arrangement} isomer {label!r}: use one of {labels}")


def build(cx: Complex, arrangement: str, isomer: str | Isomer | None = None,
          directions: np.ndarray | None = None):
    """ase.Atoms of ``cx`` in an ideal arrangement (or along given unit ``directions`` for path points)."""
    from ase import Atoms

    if arrangement not in ARRANGEMENTS:
        raise InputError(f"unknown arrangement '{arrangement}': use one of {', '.join(ARRANGEMENTS)}")
    chosen = isomer if isinstance(isomer, Isomer) else isomer_by_label(cx, arrangement, isomer)
    axes = unit_vectors(arrangement) if directions is None else np.asarray(directions, dtype=float)
    ligands = [cx.ligands[i] for i in chosen.order]
    symbols = [cx.metal.symbol] + [lig.donor for lig in ligands]
    positions = [np.zeros(3)] + [ml_distance_angstrom(cx, lig) * axis for lig, axis in zip(ligands, axes)]
    fragment_of = [-1, 0, 1, 2, 3]
    tails = _place_fragments(cx, ligands, axes)
    for site, (ligand, tail) in enumerate(zip(ligands, tails)):
        symbols.extend(ligand.symbols[1:])
        positions.extend(tail)
        fragment_of.extend([site] * len(tail))
    atoms = Atoms(symbols=symbols, positions=np.array(positions))
    atoms.info.update(
        formula=cx.formula, charge=cx.charge, arrangement=arrangement, isomer=chosen.label,
        donor_indices=[1, 2, 3, 4], ligand_order=[lig.name for lig in ligands],
    )
    atoms.arrays["fragment"] = np.array(fragment_of)
    return atoms


def build_all(cx: Complex, arrangements=ARRANGEMENTS) -> list:
    """One structure per arrangement and isomer."""
    names = tuple(lig.name for lig in cx.ligands)
    return [build(cx, arrangement, isomer) for arrangement in arrangements for isomer in isomers(names, arrangement)]


def build_path_point(cx: Complex, trans_angle_deg: float, isomer: str | None = None):
    """A point of the D2d path T-4 → SP-4 at this trans angle, ligands in the SP-4 isomer's site order."""
    chosen = isomer_by_label(cx, "SP-4", isomer)
    atoms = build(cx, "SP-4", chosen, directions=d2d_path(trans_angle_deg))
    atoms.info.update(arrangement="path", trans_angle_deg=float(trans_angle_deg))
    return atoms


def _frame(axis: np.ndarray) -> np.ndarray:
    """Rotation taking local (x, y, z) to (reference ⟂ axis, y, axis): planar ligands stand upright on the
    square plane (reference = global z, or x for bonds along z)."""
    z = axis / np.linalg.norm(axis)
    reference = np.array([0.0, 0.0, 1.0]) if abs(z[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    x = reference - (reference @ z) * z
    x /= np.linalg.norm(x)
    return np.column_stack([x, np.cross(z, x), z])


def _spin_about_z(angle_rad: float) -> np.ndarray:
    c, s = np.cos(angle_rad), np.sin(angle_rad)
    return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])


def _place_fragments(cx: Complex, ligands: list[Ligand], axes: np.ndarray) -> list[np.ndarray]:
    """Non-donor atoms of each ligand in the molecule frame; fragments are turned about their M–L axis,
    one after the other, to the orientation that keeps them furthest from what is already placed."""
    placed_positions = [np.zeros((1, 3))]
    placed_radii = [np.array([cx.metal.radius_angstrom])]
    donors = [ml_distance_angstrom(cx, lig) * axis for lig, axis in zip(ligands, axes)]
    for donor, lig in zip(donors, ligands):
        placed_positions.append(donor[None, :])
        placed_radii.append(np.array([covalent_radius_angstrom(lig.donor)]))
    tails = []
    for donor, ligand, axis in zip(donors, ligands, axes):
        local = ligand.positions_angstrom[1:]
        if len(local) == 0:
            tails.append(np.zeros((0, 3)))
            continue
        radii = np.array([covalent_radius_angstrom(s) for s in ligand.symbols[1:]])
        others = np.vstack(placed_positions)
        other_radii = np.concatenate(placed_radii)
        frame = _frame(axis)
        best, best_score = None, -np.inf
        for step in range(_ROTATION_STEPS):
            trial = donor + local @ (frame @ _spin_about_z(2 * np.pi * step / _ROTATION_STEPS)).T
            gaps = np.linalg.norm(trial[:, None, :] - others[None, :, :], axis=2) / (radii[:, None] + other_radii[None, :])
            gaps[:, 0] = np.inf if len(others) else gaps[:, 0]  # the metal: bonded through the donor
            score = gaps.min()
            if score > best_score + 1e-9:
                best, best_score = trial, score
        tails.append(best)
        placed_positions.append(best)
        placed_radii.append(radii)
    return tails


def clashes(atoms, factor: float = CLASH_FACTOR) -> list[tuple[int, int, float]]:
    """Pairs of atoms from different ligands (or metal–non-donor) closer than ``factor`` × radii sum."""
    fragment = atoms.arrays["fragment"]
    symbols = atoms.get_chemical_symbols()
    radii = np.array([covalent_radius_angstrom(s) for s in symbols])
    positions = atoms.get_positions()
    found = []
    donors = set(atoms.info["donor_indices"])
    for i in range(len(atoms)):
        for j in range(i + 1, len(atoms)):
            same_ligand = fragment[i] == fragment[j] and fragment[i] >= 0
            metal_donor = (i == 0 and j in donors)
            if same_ligand or metal_donor:
                continue
            distance = float(np.linalg.norm(positions[i] - positions[j]))
            if distance < factor * (radii[i] + radii[j]):
                found.append((i, j, distance))
    return found
