"""Rotational symmetry number of a structure: the count of proper rotations that map it onto itself.

The symmetry number σ of the rotational partition function is the order of the point group's subgroup of
proper rotations (H2O 2, NH3 3, CH4 and T-4 MX4 12, SP-4 MX4 8; linear: 2 with a centre of inversion,
else 1). It is found here without naming the point group: every proper rotation about the centre of mass
maps two chosen off-centre, non-collinear atoms a, b onto atoms a', b' of the same elements at the same
distances, and is fixed by those two pairs; each candidate is kept when it maps every atom within
``tolerance_angstrom`` of an atom of the same element. Near the tolerance, noise can pass some rotations of
a group and fail others, so the rotations found are closed under composition (as the atom permutations
they induce, which compose exactly) and every member of the closure must be a proper rotation within twice
the tolerance; when one is not, the search runs again at half the tolerance. The answer is therefore
always the order of a group.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

# A relaxed structure is symmetric only to its convergence. Measured on GFN2-xTB free relaxations with
# geomeTRIC's default criteria: Ni(CO)4 (Td) gives σ 1 at 0.01 Å and 12 from 0.02 Å; after tight criteria
# 12 already at 0.005 Å. Tighter than 0.05 Å misses the symmetry of default-converged structures; a real
# distortion (the C2v T-4 [NiCl4]2- triplet, bonds 2.20/2.27 Å) stays visible up to 0.1 Å (fourfold default).
SYMMETRY_TOLERANCE_ANGSTROM = 0.05
_LARGEST_GROUP = 60  # the icosahedral rotation group; anything larger is a failed closure


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


def _image(rotated: np.ndarray, positions: np.ndarray, numbers: np.ndarray,
           tolerance: float) -> tuple[int, ...] | None:
    """The atom permutation a rotation induces (atom i lands on atom p[i]), or None if it is no symmetry."""
    distances = np.linalg.norm(rotated[:, None, :] - positions[None, :, :], axis=2)
    distances[numbers[:, None] != numbers[None, :]] = np.inf
    permutation = distances.argmin(axis=1)
    if (distances.min(axis=1) >= tolerance).any() or len(set(permutation)) != len(permutation):
        return None
    return tuple(int(j) for j in permutation)


def _rotation_between(frame_from: np.ndarray, frame_to: np.ndarray) -> np.ndarray:
    """Proper rotation R (least squares) with R @ frame_from[i] ≈ frame_to[i] (Kabsch)."""
    u, _, vt = np.linalg.svd(frame_to.T @ frame_from)
    d = np.sign(np.linalg.det(u @ vt))
    return u @ np.diag([1.0, 1.0, d]) @ vt


def _frame(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    cross = np.cross(a, b)
    return np.array([a, b, cross / np.linalg.norm(cross) * np.linalg.norm(a)])


def _candidate_permutations(positions: np.ndarray, numbers: np.ndarray, tolerance: float) -> set[tuple[int, ...]]:
    """Permutations induced by the proper rotations that carry two reference atoms a, b onto same-element atoms."""
    radii = np.linalg.norm(positions, axis=1)
    off_centre = np.flatnonzero(radii > tolerance)
    # The rarest element first: fewest candidate images a', b'.
    counts = {z: int((numbers[off_centre] == z).sum()) for z in set(numbers[off_centre])}
    order = sorted(off_centre, key=lambda i: (counts[numbers[i]], i))
    a = order[0]
    b = next((i for i in order[1:] if np.linalg.norm(np.cross(positions[a], positions[i])) > tolerance * radii[i]),
             None)
    if b is None:
        raise InputError("the structure is linear: its symmetry number follows from inversion, not rotations")
    frame = _frame(positions[a], positions[b])
    ab = np.linalg.norm(positions[a] - positions[b])
    images_a = [i for i in off_centre if numbers[i] == numbers[a] and abs(radii[i] - radii[a]) < tolerance]
    images_b = [i for i in off_centre if numbers[i] == numbers[b] and abs(radii[i] - radii[b]) < tolerance]
    found = set()
    for image_a in images_a:
        for image_b in images_b:
            if image_b == image_a or abs(np.linalg.norm(positions[image_a] - positions[image_b]) - ab) > 2 * tolerance:
                continue
            rotation = _rotation_between(frame, _frame(positions[image_a], positions[image_b]))
            permutation = _image(positions @ rotation.T, positions, numbers, tolerance)
            if permutation is not None:
                found.add(permutation)
    return found


def _closure(permutations: set[tuple[int, ...]]) -> set[tuple[int, ...]]:
    """The group the permutations generate (composition is exact, unlike products of noisy matrices)."""
    group = set(permutations)
    while len(group) <= _LARGEST_GROUP:
        products = {tuple(p[j] for j in q) for p in group for q in group} - group
        if not products:
            break
        group |= products
    return group


def _fits(permutation: tuple[int, ...], positions: np.ndarray, tolerance: float) -> bool:
    """Whether one proper rotation carries every atom i within ``tolerance`` of atom permutation[i]."""
    target = positions[list(permutation)]
    rotation = _rotation_between(positions, target)
    return bool(np.linalg.norm(positions @ rotation.T - target, axis=1).max() < tolerance)


def rotation_permutations(atoms, tolerance_angstrom: float = SYMMETRY_TOLERANCE_ANGSTROM) -> set[tuple[int, ...]]:
    """The proper rotations that map a non-linear structure onto itself, as the atom permutations they induce.

    For a non-linear structure each rotation induces a different permutation, so this set's size is σ.
    """
    positions = _centred(atoms)
    numbers = atoms.get_atomic_numbers()
    tolerance = float(tolerance_angstrom)
    while True:
        group = _closure(_candidate_permutations(positions, numbers, tolerance))
        if len(group) <= _LARGEST_GROUP and all(_fits(p, positions, 2 * tolerance) for p in group):
            return group
        tolerance /= 2


def symmetry_number(atoms, tolerance_angstrom: float = SYMMETRY_TOLERANCE_ANGSTROM) -> int:
    """Rotational symmetry number σ: 1 for an atom; 2 or 1 for a linear molecule (with or without inversion)."""
    if len(atoms) == 0:
        raise InputError("an empty structure has no symmetry number")
    if len(atoms) == 1:
        return 1
    if is_linear(atoms, tolerance_angstrom):
        positions = _centred(atoms)
        inverted = _image(-positions, positions, atoms.get_atomic_numbers(), tolerance_angstrom) is not None
        return 2 if inverted else 1
    return len(rotation_permutations(atoms, tolerance_angstrom))
