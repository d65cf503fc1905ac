"""The calculated ligand field: AOM parameters fitted to a projected d-block matrix.

The Kohn–Sham operator projected on the metal d functions (fourfold.compute.dblock) is a 5×5 matrix in the
D_ORBITALS order with an arbitrary zero. It is fitted, element by element, by least squares to
c·1 + Σ_kinds (e_σ,k A_σ,k + e_π,k A_π,k) − e_ds B, with A the angular-overlap matrices of the actual donor
directions (the same code as the estimate) and B the d–s mixing matrix of equal-strength donors. When the
arrangement cannot tell the parameters apart (in T-4 only Δt is seen), e_π is tied to e_σ by the ligand's
default pi_ratio and e_ds is left out; the result says which fit was made.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .aom import aom_matrix, overlap_factors

_RANK_TOLERANCE = 1e-6


@dataclass(frozen=True)
class AomFit:
    e_sigma_cm: dict  # ligand name -> value
    e_pi_cm: dict
    e_ds_cm: float | None
    shift_cm: float
    rms_cm: float
    tied_pi: bool  # e_π was tied to e_σ by the default ratio (underdetermined arrangement)


def _upper(matrix: np.ndarray) -> np.ndarray:
    rows, cols = np.triu_indices(5)
    return matrix[rows, cols]


def _ds_matrix(directions: np.ndarray) -> np.ndarray:
    total = sum(overlap_factors(d)[0] for d in directions)
    return -np.outer(total, total)


def fit_aom(matrix_cm: np.ndarray, directions: np.ndarray, ligand_names, pi_ratios: dict | None = None) -> AomFit:
    """Least-squares AOM parameters (cm⁻¹) for a projected 5×5 d block (cm⁻¹, D_ORBITALS order)."""
    directions = np.asarray(directions, dtype=float)
    names = list(ligand_names) if ligand_names else ["L"] * len(directions)
    kinds = list(dict.fromkeys(names))
    target = _upper(np.asarray(matrix_cm, dtype=float))
    columns, labels = [_upper(np.eye(5))], ["shift"]
    for kind in kinds:
        sites = [i for i, n in enumerate(names) if n == kind]
        columns.append(_upper(aom_matrix(directions[sites], 1.0, 0.0)))
        labels.append(("sigma", kind))
        columns.append(_upper(aom_matrix(directions[sites], 0.0, 1.0)))
        labels.append(("pi", kind))
    columns.append(_upper(_ds_matrix(directions / np.linalg.norm(directions, axis=1, keepdims=True))))
    labels.append("ds")
    design = np.column_stack(columns)
    tied = np.linalg.matrix_rank(design, tol=_RANK_TOLERANCE * np.abs(design).max()) < design.shape[1]
    if tied:
        ratios = pi_ratios or {}
        columns = [_upper(np.eye(5))]
        for kind in kinds:
            sites = [i for i, n in enumerate(names) if n == kind]
            ratio = ratios.get(kind, 0.0)
            columns.append(_upper(aom_matrix(directions[sites], 1.0, ratio)))
        design = np.column_stack(columns)
    solution, *_ = np.linalg.lstsq(design, target, rcond=None)
    rms = float(np.sqrt(np.mean((design @ solution - target) ** 2)))
    if tied:
        ratios = pi_ratios or {}
        e_sigma = {k: float(solution[1 + i]) for i, k in enumerate(kinds)}
        e_pi = {k: e_sigma[k] * ratios.get(k, 0.0) for k in kinds}
        return AomFit(e_sigma, e_pi, None, float(solution[0]), rms, True)
    values = dict(zip(labels, solution))
    return AomFit({k: float(values[("sigma", k)]) for k in kinds}, {k: float(values[("pi", k)]) for k in kinds},
                  float(values["ds"]), float(values["shift"]), rms, False)
