"""Rotational symmetry number of a structure: the count of proper rotations that map it onto itself.

The symmetry number σ of the rotational partition function is the order of the point group's subgroup of
proper rotations (H2O 2, NH3 3, CH4 and T-4 MX4 12, SP-4 MX4 8; linear: 2 with a centre of inversion,
else 1). It is found here without naming the point group: every proper rotation about the centre of mass
maps two chosen off-centre, non-collinear atoms a, b onto atoms a', b' of the same elements at the same
distances, and is fixed by those two pairs; each candidate is kept when it maps every atom within
``tolerance_angstrom`` of an atom of the same element.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

# A relaxed structure is symmetric only to its convergence: about 0.01 Å here for GFN2-xTB structures
# relaxed to geomeTRIC's default criteria. 0.05 Å still tells a D2d-flattened tetrahedron with trans
# angles above ~112° from a regular one (fourfold default).
SYMMETRY_TOLERANCE_ANGSTROM = 0.05


def _centred(atoms) -> np.ndarray:
    masses = atoms.get_masses()
    positions = np.asarray(atoms.get_positions(), dtype=float)
    return positions - masses @ positions / masses.sum()


def is_linear(atoms, tolerance_angstrom: float = SYMMETRY_TOLERANCE_ANGSTROM) -> bool:
    """True when every atom lies within the tolerance of one line (two atoms always do)."""
    positions = _centred(atoms)
    if len(positions) < 2:
        return False
    axis = np.linalg.svd(positions)[2][0]
    off_axis = positions - np.outer(positions @ axis, axis)
    return bool(np.linalg.norm(off_axis, axis=1).max() < tolerance_angstrom)


def _maps_onto_itself(rotated: np.ndarray, positions: np.ndarray, numbers: np.ndarray, tolerance: float) -> bool:
    distances = np.linalg.norm(rotated[:, None, :] - positions[None, :, :], axis=2)
    distances[numbers[:, None] != numbers[None, :]] = np.inf
    return bool((distances.min(axis=1) < tolerance).all())


def _rotation_between(frame_from: np.ndarray, frame_to: np.ndarray) -> np.ndarray:
    """Proper rotation R (least squares) with R @ frame_from[i] ≈ frame_to[i] (Kabsch)."""
    u, _, vt = np.linalg.svd(frame_to.T @ frame_from)
    d = np.sign(np.linalg.det(u @ vt))
    return u @ np.diag([1.0, 1.0, d]) @ vt


def _frame(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    cross = np.cross(a, b)
    return np.array([a, b, cross / np.linalg.norm(cross) * np.linalg.norm(a)])


def proper_rotations(atoms, tolerance_angstrom: float = SYMMETRY_TOLERANCE_ANGSTROM) -> list[np.ndarray]:
    """The distinct proper rotations (3×3, about the centre of mass) that map a non-linear structure onto itself."""
    positions = _centred(atoms)
    numbers = atoms.get_atomic_numbers()
    radii = np.linalg.norm(positions, axis=1)
    off_centre = np.flatnonzero(radii > tolerance_angstrom)
    # The rarest element first: fewest candidate images a', b'.
    counts = {z: int((numbers[off_centre] == z).sum()) for z in set(numbers[off_centre])}
    order = sorted(off_centre, key=lambda i: (counts[numbers[i]], i))
    a = order[0]
    b = next((i for i in order[1:] if np.linalg.norm(np.cross(positions[a], positions[i]))
              > tolerance_angstrom * radii[i]), None)
    if b is None:
        raise InputError("the structure is linear: its symmetry number follows from inversion, not rotations")
    frame = _frame(positions[a], positions[b])
    ab = np.linalg.norm(positions[a] - positions[b])
    candidates_a = [i for i in off_centre if numbers[i] == numbers[a] and abs(radii[i] - radii[a]) < tolerance_angstrom]
    candidates_b = [i for i in off_centre if numbers[i] == numbers[b] and abs(radii[i] - radii[b]) < tolerance_angstrom]
    found: list[np.ndarray] = []
    for image_a in candidates_a:
        for image_b in candidates_b:
            if image_b == image_a or abs(np.linalg.norm(positions[image_a] - positions[image_b]) - ab) > 2 * tolerance_angstrom:
                continue
            rotation = _rotation_between(frame, _frame(positions[image_a], positions[image_b]))
            if any(np.abs(rotation - known).max() < 1e-3 for known in found):
                continue
            if _maps_onto_itself(positions @ rotation.T, positions, numbers, tolerance_angstrom):
                found.append(rotation)
    return found


def symmetry_number(atoms, tolerance_angstrom: float = SYMMETRY_TOLERANCE_ANGSTROM) -> int:
    """Rotational symmetry number σ: 1 for an atom; 2 or 1 for a linear molecule (with or without inversion)."""
    if len(atoms) == 0:
        raise InputError("an empty structure has no symmetry number")
    if len(atoms) == 1:
        return 1
    if is_linear(atoms, tolerance_angstrom):
        positions = _centred(atoms)
        inverted = _maps_onto_itself(-positions, positions, atoms.get_atomic_numbers(), tolerance_angstrom)
        return 2 if inverted else 1
    return len(proper_rotations(atoms, tolerance_angstrom))
