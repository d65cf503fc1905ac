"""Ideal structures: ligand fragments placed along the M–L axes of an arrangement, as ase.Atoms.

Atom order: the metal (index 0), the four donors in site order (indices 1–4), then the other ligand atoms
ligand by ligand (chelates first). ``atoms.info`` carries formula, charge, arrangement, isomer, the donor
indices and the chelates' donor pairs, so every later step (relaxation constraints, shape indices, reports)
can find them. A chelate keeps its own bite angle: its two M–L axes are turned towards each other, in the
plane they span and symmetrically about their bisector, until the angle between them is the bite of the
fragment at the complex's M–L distances; the other axes stay ideal.
"""

from __future__ import annotations

import numpy as np

from ..chem.complex import Complex
from ..chem.ligands import Ligand, covalent_radius_angstrom
from ..errors import InputError
from .isomers import Isomer, isomers_of
from .polyhedra import ARRANGEMENTS, d2d_path, unit_vectors

CLASH_FACTOR = 0.8  # non-bonded atoms closer than 0.8 × (sum of covalent radii) count as a clash
_ROTATION_STEPS = 24  # trial orientations of each fragment about its M–L axis


def ml_distance_angstrom(cx: Complex, ligand: Ligand, donor: int = 0) -> float:
    """Start M–L distance: the ligand's override, else the sum of Pyykkö–Atsumi single-bond radii."""
    if ligand.distance_angstrom is not None:
        return float(ligand.distance_angstrom)
    return cx.metal.radius_angstrom + covalent_radius_angstrom(ligand.donors[donor])


def isomer_by_label(cx: Complex, arrangement: str, label: str | None) -> Isomer:
    """The isomer of ``cx`` on ``arrangement`` with this label ('' or None when there is only one)."""
    found = isomers_of(cx, arrangement)
    if label in (None, "") and len(found) == 1:
        return found[0]
    for isomer in found:
        if isomer.label == label:
            return isomer
    labels = ", ".join(repr(i.label) for i in found)
    raise InputError(f"{cx.formula} has no {arrangement} isomer {label!r}: use one of {labels}")


def _chelate_positions(cx: Complex, isomer: Isomer) -> list[tuple[int, int, Ligand]]:
    """(position of the first donor, position of the second, ligand) for each chelate of the isomer."""
    position = {site: k for k, site in enumerate(isomer.order)}
    return [(position[a], position[b], cx.ligands[cx.sites[a][0]]) for a, b in cx.chelate_site_pairs]


def donor_directions(cx: Complex, isomer: Isomer, directions: np.ndarray | None = None) -> np.ndarray:
    """Unit vectors (4, 3) to the donors in the isomer's site order: the arrangement's (or the given)
    directions, each chelate's pair closed or opened to its bite angle."""
    axes = unit_vectors(isomer.arrangement) if directions is None else np.array(directions, dtype=float)
    for first, second, ligand in _chelate_positions(cx, isomer):
        u, v = axes[first], axes[second]
        bisector = (u + v) / np.linalg.norm(u + v)
        across = (u - v) / np.linalg.norm(u - v)
        half_rad = np.radians(ligand.bite_angle_deg(ml_distance_angstrom(cx, ligand, 0), ml_distance_angstrom(cx, ligand, 1))) / 2
        axes[first] = np.cos(half_rad) * bisector + np.sin(half_rad) * across
        axes[second] = np.cos(half_rad) * bisector - np.sin(half_rad) * across
    return axes


def build(cx: Complex, arrangement: str, isomer: str | Isomer | None = None,
          directions: np.ndarray | None = None):
    """ase.Atoms of ``cx`` in an ideal arrangement (or along given unit ``directions`` for path points)."""
    from ase import Atoms

    if arrangement not in ARRANGEMENTS:
        raise InputError(f"unknown arrangement '{arrangement}': use one of {', '.join(ARRANGEMENTS)}")
    chosen = isomer if isinstance(isomer, Isomer) else isomer_by_label(cx, arrangement, isomer)
    axes = donor_directions(cx, chosen, directions)
    sites = [cx.sites[i] for i in chosen.order]
    donors = np.array([ml_distance_angstrom(cx, cx.ligands[i], k) * axis for (i, k), axis in zip(sites, axes, strict=False)])
    symbols = [cx.metal.symbol] + [cx.ligands[i].donors[k] for i, k in sites]
    positions = [np.zeros(3), *donors]
    fragment_of = [-1] + [i for i, _ in sites]
    for ligand_index, tail in _place_fragments(cx, sites, donors):
        symbols.extend(cx.ligands[ligand_index].symbols[cx.ligands[ligand_index].denticity:])
        positions.extend(tail)
        fragment_of.extend([ligand_index] * len(tail))
    atoms = Atoms(symbols=symbols, positions=np.array(positions))
    atoms.info.update(
        formula=cx.formula, charge=cx.charge, arrangement=arrangement, isomer=chosen.label,
        donor_indices=[1, 2, 3, 4], ligand_order=[cx.ligands[i].name for i, _ in sites],
        chelate_pairs=[(1 + first, 1 + second) for first, second, _ in _chelate_positions(cx, chosen)],
    )
    atoms.arrays["fragment"] = np.array(fragment_of)
    return atoms


def build_all(cx: Complex, arrangements=ARRANGEMENTS) -> list:
    """One structure per arrangement and isomer."""
    return [build(cx, arrangement, isomer) for arrangement in arrangements for isomer in isomers_of(cx, arrangement)]


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


def _rotation_onto(source: np.ndarray, target: np.ndarray) -> np.ndarray:
    """Proper rotation R with R @ source[i] ≈ target[i] (Kabsch; both sets share the origin)."""
    u, _, vt = np.linalg.svd(target.T @ source)
    sign = np.sign(np.linalg.det(u @ vt))
    return u @ np.diag([1.0, 1.0, sign]) @ vt


def _gap_score(trial: np.ndarray, radii: np.ndarray, others: np.ndarray, other_radii: np.ndarray) -> float:
    """Smallest distance / (sum of covalent radii) from the trial atoms to what is placed (metal excluded)."""
    gaps = np.linalg.norm(trial[:, None, :] - others[None, 1:, :], axis=2) / (radii[:, None] + other_radii[None, 1:])
    return float(gaps.min()) if gaps.size else np.inf


def _chelate_trials(cx: Complex, ligand: Ligand, first: int, second: int, donors: np.ndarray):
    """The chelate's other atoms placed so its donors land on two sites (both ways round when the donors are alike)."""
    local = ligand.positions_angstrom
    ends = [(0, 1)] + ([(1, 0)] if ligand.donors[0] == ligand.donors[1] else [])
    for a, b in ends:
        metal = ligand.metal_position_angstrom(ml_distance_angstrom(cx, ligand, a), ml_distance_angstrom(cx, ligand, b))
        source = np.array([local[a] - metal, local[b] - metal])
        rotation = _rotation_onto(source, donors[[first, second]])
        yield (local[2:] - metal) @ rotation.T


def _monodentate_trials(ligand: Ligand, donor: np.ndarray):
    local = ligand.positions_angstrom[1:]
    frame = _frame(donor)
    for step in range(_ROTATION_STEPS):
        yield donor + local @ (frame @ _spin_about_z(2 * np.pi * step / _ROTATION_STEPS)).T


def _place_fragments(cx: Complex, sites: list[tuple[int, int]], donors: np.ndarray) -> list[tuple[int, np.ndarray]]:
    """(ligand index, non-donor atoms in the molecule frame) per ligand, chelates first. Monodentate fragments
    are turned about their M–L axis, one after the other, to the orientation that keeps them furthest from
    what is already placed; a chelate's orientation follows from its donors, up to which end goes where."""
    placed_positions = [np.zeros((1, 3)), donors]
    placed_radii = [np.array([cx.metal.radius_angstrom]),
                    np.array([covalent_radius_angstrom(cx.ligands[i].donors[k]) for i, k in sites])]
    position = {site: k for k, site in enumerate(sites)}
    order = sorted(range(len(cx.ligands)), key=lambda i: (not cx.ligands[i].is_chelate, position[(i, 0)]))
    placed = []
    for index in order:
        ligand = cx.ligands[index]
        if len(ligand.symbols) == ligand.denticity:
            continue
        if ligand.is_chelate:
            trials = _chelate_trials(cx, ligand, position[(index, 0)], position[(index, 1)], donors)
        else:
            trials = _monodentate_trials(ligand, donors[position[(index, 0)]])
        radii = np.array([covalent_radius_angstrom(s) for s in ligand.symbols[ligand.denticity:]])
        others, other_radii = np.vstack(placed_positions), np.concatenate(placed_radii)
        best, best_score = None, -np.inf
        for trial in trials:
            score = _gap_score(trial, radii, others, other_radii)
            if score > best_score + 1e-9:  # ties keep the first orientation, so builds are reproducible
                best, best_score = trial, score
        placed.append((index, best))
        placed_positions.append(best)
        placed_radii.append(radii)
    return placed


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
