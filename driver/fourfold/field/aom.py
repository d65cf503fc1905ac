"""Angular overlap model for arbitrary ligand directions.

H_ij = Σ_L [ e_σ,L F_σ,i(L) F_σ,j(L) + e_π,L Σ_p F_π,i(L,p) F_π,j(L,p) ] − e_ds (Σ_L F_σ,i)(Σ_L F_σ,j)

with F the angular overlap factors of the real d functions (Schäffer & Jørgensen, Mol. Phys. 1965, 9, 401;
Schäffer, Pure Appl. Chem. 1970, 24, 361) normalised so that F_σ(z², ligand on z) = 1, and the d–s mixing
term in the form of Smith (1977) and Deeth & Gerloch (1984) (from memory). The σ factor is the real d
function evaluated on the bond direction; the π factors are its derivatives along the two directions
perpendicular to the bond, divided by √3 (F_π(xz, ligand on x, π along z) = 1).
Eigenvalues are the five d-orbital energies, in the units of the e parameters (cm⁻¹ throughout fourfold).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

# Real d functions in PySCF's spherical order (m = −2 … 2), so projected Kohn–Sham blocks line up.
D_ORBITALS = ("xy", "yz", "z2", "xz", "x2-y2")
_SQRT3 = np.sqrt(3.0)


def _d_values(n: np.ndarray) -> np.ndarray:
    """σ factors: the five real d functions at unit vectors n (shape (..., 3)) -> (..., 5)."""
    x, y, z = n[..., 0], n[..., 1], n[..., 2]
    return np.stack([_SQRT3 * x * y, _SQRT3 * y * z, (3 * z * z - 1) / 2, _SQRT3 * x * z,
                     _SQRT3 / 2 * (x * x - y * y)], axis=-1)


def _d_gradients(n: np.ndarray) -> np.ndarray:
    """Cartesian gradients of the homogeneous d polynomials at n -> (..., 5, 3)."""
    x, y, z = n[..., 0], n[..., 1], n[..., 2]
    zero = np.zeros_like(x)
    rows = [
        (_SQRT3 * y, _SQRT3 * x, zero),
        (zero, _SQRT3 * z, _SQRT3 * y),
        (-x, -y, 2 * z),  # (3z² − r²)/2
        (_SQRT3 * z, zero, _SQRT3 * x),
        (_SQRT3 * x, -_SQRT3 * y, zero),
    ]
    return np.stack([np.stack(r, axis=-1) for r in rows], axis=-2)


def _perpendicular_pair(n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    reference = np.array([0.0, 0.0, 1.0]) if abs(n[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    p1 = np.cross(n, reference)
    p1 /= np.linalg.norm(p1)
    return p1, np.cross(n, p1)


def overlap_factors(direction: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(F_σ (5,), F_π (2, 5)) for one ligand direction (any length)."""
    n = np.asarray(direction, dtype=float)
    n = n / np.linalg.norm(n)
    gradient = _d_gradients(n)
    f_pi = np.array([gradient @ p for p in _perpendicular_pair(n)]) / _SQRT3
    return _d_values(n), f_pi


def aom_matrix(directions, e_sigma, e_pi, e_ds: float = 0.0) -> np.ndarray:
    """5×5 d-block ligand-field matrix in D_ORBITALS order for ligands along ``directions`` (N, 3).

    ``e_sigma`` and ``e_pi`` are per ligand (scalars broadcast); π-acceptors have e_pi < 0. The π
    interaction is taken as isotropic about each bond (linear or cylindrical ligands).
    """
    directions = np.atleast_2d(np.asarray(directions, dtype=float))
    if directions.ndim != 2 or directions.shape[1] != 3:
        raise InputError(f"ligand directions must be an (N, 3) array, got shape {directions.shape}")
    if np.any(np.linalg.norm(directions, axis=1) < 1e-12):
        raise InputError("a ligand direction has zero length")
    count = len(directions)
    e_sigma = np.broadcast_to(np.asarray(e_sigma, dtype=float), (count,))
    e_pi = np.broadcast_to(np.asarray(e_pi, dtype=float), (count,))
    matrix = np.zeros((5, 5))
    sigma_sum = np.zeros(5)
    for direction, es, ep in zip(directions, e_sigma, e_pi, strict=False):
        f_sigma, f_pi = overlap_factors(direction)
        matrix += es * np.outer(f_sigma, f_sigma) + ep * (f_pi.T @ f_pi)
        sigma_sum += f_sigma
    return matrix - e_ds * np.outer(sigma_sum, sigma_sum)


def d_levels(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Ascending d-orbital energies and their characters (columns: weights on D_ORBITALS)."""
    energies, vectors = np.linalg.eigh(matrix)
    return energies, vectors**2


def level_labels(characters: np.ndarray) -> list[str]:
    """Dominant d character of each level ('z2', 'xy', … or 'xz/yz' when two share it)."""
    labels = []
    for column in characters.T:
        top = np.argsort(column)[::-1]
        if column[top[1]] > 0.3:
            labels.append(f"{D_ORBITALS[top[0]]}/{D_ORBITALS[top[1]]}")
        else:
            labels.append(D_ORBITALS[top[0]])
    return labels
