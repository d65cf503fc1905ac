"""Geometry indices of a four-coordinate centre: L–M–L angles, tau4, tau4' and continuous shape measures.

- tau4: Yang, Powell, Houser, Dalton Trans. 2007, 955.
- tau4': Okuniewski, Rosiak, Chojnacki, Becker, Polyhedron 2015, 90, 47.
- Continuous shape measure (CShM): Pinsky & Avnir, Inorg. Chem. 1998, 37, 5575; the Alvarez group's
  "centred" variant, with the metal as a fifth vertex, is what ``shape_measures`` reports.
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from functools import cache
from typing import TYPE_CHECKING

import numpy as np

from fourfold.errors import InputError
from fourfold.geometry.polyhedra import ARRANGEMENTS, TETRAHEDRAL_ANGLE_DEG, unit_vectors

if TYPE_CHECKING:
    from ase import Atoms

# Exhaustive vertex pairing costs N! rotations; 8 vertices (40 320) is already far beyond a metal + 4 donors.
MAX_VERTICES = 8

# Donor pairs in the order ``ligand_angles_deg`` reports their angles.
_PAIRS = np.array(list(itertools.combinations(range(4), 2)))

# Below this a bond or a point cloud has no direction or size to measure.
_MIN_LENGTH_ANGSTROM = 1e-8

# Ideal references with the metal at the origin as vertex 0, stacked in ARRANGEMENTS order.
_CENTRED_REFERENCES = np.stack([np.vstack([np.zeros(3), unit_vectors(name)]) for name in ARRANGEMENTS])


def _as_array(name: str, value) -> np.ndarray:
    try:
        array = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be coordinates in angstrom, got {value!r:.40}") from None
    if not np.all(np.isfinite(array)):
        raise InputError(f"{name} contains a NaN or infinite coordinate")
    return array


def _as_position(name: str, value) -> np.ndarray:
    position = _as_array(name, value)
    if position.shape != (3,):
        raise InputError(f"{name} must have shape (3,), got {position.shape}")
    return position


def _as_points(name: str, value, rows: int | None = None) -> np.ndarray:
    points = _as_array(name, value)
    if points.ndim != 2 or points.shape[1] != 3 or (rows is not None and points.shape[0] != rows):
        raise InputError(f"{name} must have shape ({rows or 'N'}, 3), got {points.shape}")
    return points


def _bond_vectors(metal_angstrom, donors_angstrom) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Validated metal (3,), donors (4, 3) and metal->donor vectors (4, 3)."""
    metal = _as_position("metal position", metal_angstrom)
    donors = _as_points("donor positions", donors_angstrom, rows=4)
    bonds = donors - metal
    lengths = np.linalg.norm(bonds, axis=1)
    if np.any(lengths < _MIN_LENGTH_ANGSTROM):
        raise InputError(f"donor {int(np.argmin(lengths))} sits on the metal: give distinct positions")
    return metal, donors, bonds


def _angles_deg(bonds: np.ndarray) -> np.ndarray:
    u, v = bonds[_PAIRS[:, 0]], bonds[_PAIRS[:, 1]]
    # atan2 of |u×v| and u·v keeps full precision near 180°, where arccos of the cosine loses half the digits.
    sine = np.linalg.norm(np.cross(u, v), axis=1)
    cosine = np.einsum("ij,ij->i", u, v)
    return np.degrees(np.arctan2(sine, cosine))


def ligand_angles_deg(metal_angstrom, donors_angstrom) -> np.ndarray:
    """The six L–M–L angles (degrees) for donor pairs (0,1), (0,2), (0,3), (1,2), (1,3), (2,3)."""
    return _angles_deg(_bond_vectors(metal_angstrom, donors_angstrom)[2])


def _two_largest(angles_deg: np.ndarray) -> tuple[float, float]:
    """(alpha, beta): the two largest angles, beta >= alpha."""
    ordered = np.sort(angles_deg)
    return float(ordered[-2]), float(ordered[-1])


def _tau4(alpha_deg: float, beta_deg: float) -> float:
    return (360.0 - (alpha_deg + beta_deg)) / (360.0 - 2.0 * TETRAHEDRAL_ANGLE_DEG)


def _tau4_prime(alpha_deg: float, beta_deg: float) -> float:
    return (beta_deg - alpha_deg) / (360.0 - TETRAHEDRAL_ANGLE_DEG) + (180.0 - beta_deg) / (
        180.0 - TETRAHEDRAL_ANGLE_DEG
    )


def tau4(metal_angstrom, donors_angstrom) -> float:
    """tau4 = (360° − (α+β)) / (360° − 2θ), θ = arccos(−1/3): 1 for T-4, 0 for SP-4."""
    return _tau4(*_two_largest(ligand_angles_deg(metal_angstrom, donors_angstrom)))


def tau4_prime(metal_angstrom, donors_angstrom) -> float:
    """tau4' = (β−α)/(360°−θ) + (180°−β)/(180°−θ): like tau4 but separates seesaw from trigonal pyramid."""
    return _tau4_prime(*_two_largest(ligand_angles_deg(metal_angstrom, donors_angstrom)))


@cache
def _permutations(n: int) -> np.ndarray:
    perms = np.array(list(itertools.permutations(range(n))), dtype=np.intp)
    perms.setflags(write=False)
    return perms


def _cshm_batch(points: np.ndarray, references: np.ndarray, centre_fixed: bool = False) -> np.ndarray:
    """S(points | reference) for each of the references (M, N, 3); points (N, 3) validated, N >= 1.

    For a fixed pairing, the best translation puts both centroids together, the best proper rotation gives
    the overlap c = σ1 + σ2 ± σ3 of the cross-covariance (minus sign when det < 0: a reflection is not
    allowed, so a chiral reference is not matched by its mirror image), and the best scale of the
    reference turns the residual into |Q|² − c²/|P|². Hence S = 100 (1 − c²/(|Q|²|P|²)), maximised c.
    """
    q = points - points.mean(axis=0)
    q_norm2 = float(np.einsum("ij,ij->", q, q))
    if q_norm2 < _MIN_LENGTH_ANGSTROM**2:
        raise InputError("the points all coincide: there is no shape to measure")
    p = references - references.mean(axis=1, keepdims=True)
    p_norm2 = np.einsum("mij,mij->m", p, p)
    perms = _permutations(points.shape[0])
    if centre_fixed:  # the metal (vertex 0) pairs with the reference centre, as in the centred CShM
        perms = perms[perms[:, 0] == 0]
    # covariance[m, k] = Σ_n p[m, perm_k(n)] q[n]^T: reference vertex perm_k(n) is paired with point n.
    covariance = np.swapaxes(p[:, perms], -1, -2) @ q
    singular = np.linalg.svd(covariance, compute_uv=False)
    handedness = np.where(np.linalg.det(covariance) < 0.0, -1.0, 1.0)
    overlap = singular[..., 0] + singular[..., 1] + handedness * singular[..., 2]
    best = overlap.max(axis=1)
    # Rounding can put a perfect match a few ulps below 0.
    return np.clip(100.0 * (1.0 - best**2 / (q_norm2 * p_norm2)), 0.0, 100.0)


def cshm(points, reference) -> float:
    """Continuous shape measure S(points | reference) in [0, 100]; 0 means the same shape.

    Minimised over translation, proper rotation, isotropic scale of the reference and every pairing of
    vertices (all N! permutations). Both arrays are (N, 3), in the same length unit.
    """
    q = _as_points("points", points)
    p = _as_points("reference", reference)
    if q.shape != p.shape:
        raise InputError(f"points {q.shape} and reference {p.shape} must have the same number of vertices")
    if q.shape[0] > MAX_VERTICES:
        raise InputError(f"at most {MAX_VERTICES} vertices can be paired exhaustively, got {q.shape[0]}")
    centred = p - p.mean(axis=0)
    if np.einsum("ij,ij->", centred, centred) < _MIN_LENGTH_ANGSTROM**2:
        raise InputError("the reference points all coincide: give a reference shape")
    return float(_cshm_batch(q, p[np.newaxis])[0])


def _shape_measures(metal: np.ndarray, donors: np.ndarray) -> dict[str, float]:
    values = _cshm_batch(np.vstack([metal, donors]), _CENTRED_REFERENCES, centre_fixed=True)
    return {name: float(value) for name, value in zip(ARRANGEMENTS, values, strict=False)}


def shape_measures(metal_angstrom, donors_angstrom) -> dict[str, float]:
    """Centred CShM (metal + 4 donors) against every ideal arrangement, keyed by ARRANGEMENTS."""
    metal, donors, _ = _bond_vectors(metal_angstrom, donors_angstrom)
    return _shape_measures(metal, donors)


def _nearest(measures: dict[str, float]) -> tuple[str, float]:
    # Ties go to the first arrangement in ARRANGEMENTS order.
    name = min(measures, key=measures.__getitem__)
    return name, measures[name]


def nearest_shape(metal_angstrom, donors_angstrom) -> tuple[str, float]:
    """(arrangement, S) of the ideal arrangement with the smallest centred CShM."""
    return _nearest(shape_measures(metal_angstrom, donors_angstrom))


def _checked_indices(n_atoms: int, donor_indices: Sequence[int], metal_index: int) -> tuple[int, list[int]]:
    def as_index(value) -> int:
        if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)):
            raise InputError(f"atom index {value!r} is not an integer")
        if not 0 <= value < n_atoms:
            raise InputError(f"atom index {value} is outside 0..{n_atoms - 1}")
        return int(value)

    metal = as_index(metal_index)
    try:
        donors = [as_index(i) for i in donor_indices]
    except TypeError:
        raise InputError("donor indices must be a sequence of four atom indices") from None
    if len(donors) != 4 or len(set(donors)) != 4:
        raise InputError(f"give four distinct donor indices, got {list(donor_indices)}")
    if metal in donors:
        raise InputError(f"the metal index {metal} is also listed as a donor")
    return metal, donors


def geometry_indices(atoms: Atoms, donor_indices: Sequence[int], metal_index: int = 0) -> dict:
    """tau4, tau4', centred shape measures and the nearest ideal arrangement of one metal centre.

    Positions are taken as they stand (angstrom, no periodic images). Returns a dict with keys
    ``tau4``, ``tau4_prime``, ``shape_measures`` (arrangement -> S), ``nearest_shape`` and
    ``nearest_shape_measure``.
    """
    positions = atoms.get_positions()
    metal_at, donors_at = _checked_indices(len(positions), donor_indices, metal_index)
    metal, donors, bonds = _bond_vectors(positions[metal_at], positions[donors_at])
    alpha_deg, beta_deg = _two_largest(_angles_deg(bonds))
    measures = _shape_measures(metal, donors)
    nearest, nearest_measure = _nearest(measures)
    return {
        "tau4": _tau4(alpha_deg, beta_deg),
        "tau4_prime": _tau4_prime(alpha_deg, beta_deg),
        "shape_measures": measures,
        "nearest_shape": nearest,
        "nearest_shape_measure": nearest_measure,
    }
