"""The calculated ligand field: AOM parameters fitted to a projected d-block matrix.

The Kohn–Sham operator projected on the metal d functions (fourfold.compute.dblock) is a 5×5 matrix in the
D_ORBITALS order with an arbitrary zero. It is fitted, element by element, by least squares to
c·1 + Σ_kinds (e_σ,k A_σ,k + e_π,k A_π,k) − e_ds B, with A the angular-overlap matrices of the actual donor
directions (the same code as the estimate) and B the d–s mixing matrix of equal-strength donors.

Only what the d block determines is fitted. Models are tried from the fullest down — (e_σ, e_π per kind,
e_ds), then without e_ds, then e_π tied to e_σ by the ligand's default pi_ratio — and the first whose design
matrix is well conditioned is kept: in T-4 only Δt is seen, and a slightly distorted tetrahedron is nearly
as blind (its full design is formally of full rank but its condition number is ~10², and an unconstrained fit
then returns e_σ of either sign in the tens of thousands of cm⁻¹). e_σ and e_ds are bounded at zero (σ donors
raise the d levels; e_ds lowers z² by definition) by a bounded least-squares solve; e_π keeps the sign of the
ligand's π character (π acceptors have e_π < 0). A fit is withheld, with the reason, when
even the smallest model is ill conditioned, the angular-overlap form does not describe the d block (rms residual
above a stated fraction of the d-level spread), a σ donor's e_σ ends at the bound, or |e_π| exceeds e_σ.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .aom import aom_matrix, overlap_factors

# Condition number of the column-normalised design above which its parameters are not separated. Measured with
# this module's design: well-posed models of ideal T-4, SP-4 (trans and cis, one or two ligand kinds) are at
# 2.5–14; full models of tetrahedra and cis planes distorted by 3 % are at 95–130 (fourfold default).
CONDITION_LIMIT = 30.0
# rms residual per matrix element above this fraction of the d-level spread: the AOM form does not describe the
# block, and its parameters are not reported (fourfold default).
RESIDUAL_LIMIT_FRACTION = 0.10


@dataclass(frozen=True)
class AomFit:
    e_sigma_cm: dict  # ligand name -> value; empty when the fit is withheld
    e_pi_cm: dict
    e_ds_cm: float | None
    shift_cm: float | None
    rms_cm: float | None  # residual per upper-triangle element of the 5×5 block
    tied_pi: bool  # e_π was tied to e_σ by the default ratio (underdetermined arrangement)
    condition_number: float  # of the column-normalised design of the model kept (or of the last one tried)
    withheld: str | None = None  # why no parameters are reported
    at_bound: tuple = ()  # parameters the bounds held at zero (the unbounded optimum was negative)


def _upper(matrix: np.ndarray) -> np.ndarray:
    rows, cols = np.triu_indices(5)
    return matrix[rows, cols]


def _ds_matrix(directions: np.ndarray) -> np.ndarray:
    total = sum(overlap_factors(d)[0] for d in directions)
    return -np.outer(total, total)


def _condition(design: np.ndarray) -> float:
    """Condition number of the design with unit-norm columns (so parameter units do not enter)."""
    norms = np.linalg.norm(design, axis=0)
    singular = np.linalg.svd(design / np.where(norms > 0, norms, 1.0), compute_uv=False)
    return float(singular[0] / max(singular[-1], 1e-16 * singular[0]))  # finite: stored as JSON


def _models(directions, names, kinds, ratios):
    """(label, columns, tied) from the fullest model to the smallest; labels ('sigma', kind), ('pi', kind), 'ds'."""
    unit = directions / np.linalg.norm(directions, axis=1, keepdims=True)
    sites = {kind: [i for i, n in enumerate(names) if n == kind] for kind in kinds}
    shift = [("shift", _upper(np.eye(5)))]
    free = [c for kind in kinds for c in ((("sigma", kind), _upper(aom_matrix(directions[sites[kind]], 1.0, 0.0))),
                                          (("pi", kind), _upper(aom_matrix(directions[sites[kind]], 0.0, 1.0))))]
    tied = [(("sigma", kind), _upper(aom_matrix(directions[sites[kind]], 1.0, ratios.get(kind, 0.0))))
            for kind in kinds]
    return [(shift + free + [("ds", _upper(_ds_matrix(unit)))], False), (shift + free, False), (shift + tied, True)]


def _determined_model(models):
    """(labels, design, tied, condition number) of the fullest model whose design is well conditioned, else of the
    smallest one (which the caller withholds)."""
    chosen = None
    for columns, tied in models:
        design = np.column_stack([column for _, column in columns])
        chosen = [label for label, _ in columns], design, tied, _condition(design)
        if chosen[3] <= CONDITION_LIMIT:
            break
    return chosen


def _bounds(labels, ratios) -> tuple[np.ndarray, np.ndarray]:
    """e_σ ≥ 0 and e_ds ≥ 0; e_π keeps the sign of the ligand's π character (its default pi_ratio: π donors
    ≥ 0, π acceptors ≤ 0; free where the ratio is zero or unknown); the shift is free."""
    lower, upper = [], []
    for label in labels:
        ratio = ratios.get(label[1], 0.0) if isinstance(label, tuple) and label[0] == "pi" else 0.0
        if label == "ds" or label[0] == "sigma":
            lower.append(0.0), upper.append(np.inf)
        elif label[0] == "pi" and ratio > 0:
            lower.append(0.0), upper.append(np.inf)
        elif label[0] == "pi" and ratio < 0:
            lower.append(-np.inf), upper.append(0.0)
        else:
            lower.append(-np.inf), upper.append(np.inf)
    return np.array(lower), np.array(upper)


def _describe(kinds) -> str:
    return ", ".join(f"e_σ({k})" for k in kinds)


def fit_aom(matrix_cm: np.ndarray, directions: np.ndarray, ligand_names, pi_ratios: dict | None = None) -> AomFit:
    """Bounded least-squares AOM parameters (cm⁻¹) for a projected 5×5 d block (cm⁻¹, D_ORBITALS order)."""
    from scipy.optimize import lsq_linear

    directions = np.asarray(directions, dtype=float)
    names = list(ligand_names) if ligand_names else ["L"] * len(directions)
    kinds = list(dict.fromkeys(names))
    ratios = pi_ratios or {}
    matrix_cm = np.asarray(matrix_cm, dtype=float)
    target = _upper(matrix_cm)
    labels, design, tied, condition = _determined_model(_models(directions, names, kinds, ratios))
    if condition > CONDITION_LIMIT:
        return AomFit({}, {}, None, None, None, True, condition,
                      withheld=f"ill-conditioned (condition number {condition:.0f} > {CONDITION_LIMIT:.0f} even with "
                               f"e_π tied and no e_ds): the d block does not separate {_describe(kinds)}")
    lower, upper = _bounds(labels, ratios)
    solved = lsq_linear(design, target, bounds=(lower, upper), method="bvls")
    solution = solved.x
    at_bound = tuple(_name(label) for label, active in zip(labels, solved.active_mask, strict=False) if active != 0)
    rms = float(np.sqrt(np.mean((design @ solution - target) ** 2)))
    values = dict(zip(labels, (float(v) for v in solution), strict=False))
    e_sigma = {k: values[("sigma", k)] for k in kinds}
    e_pi = {k: e_sigma[k] * ratios.get(k, 0.0) for k in kinds} if tied else {k: values[("pi", k)] for k in kinds}
    problems = _unphysical(rms, float(np.ptp(np.linalg.eigvalsh(matrix_cm))), e_sigma, e_pi, at_bound)
    if problems:
        return AomFit({}, {}, None, None, rms, tied, condition, withheld="; ".join(problems), at_bound=at_bound)
    return AomFit(e_sigma, e_pi, values.get("ds"), values["shift"], rms, tied, condition, at_bound=at_bound)


def _unphysical(rms, spread, e_sigma, e_pi, at_bound) -> list[str]:
    """Why a bounded fit still does not describe the block: a poor fit, a σ donor left without σ bonding (its
    e_σ held at the bound), or a π interaction stronger than the σ one (π overlap is the smaller; Schäffer &
    Jørgensen 1965)."""
    found = []
    if rms > RESIDUAL_LIMIT_FRACTION * spread:
        found.append(f"poor fit (rms residual {rms:.0f} cm⁻¹ > {100 * RESIDUAL_LIMIT_FRACTION:.0f} % of the "
                     f"{spread:.0f} cm⁻¹ d-level spread): the AOM form does not describe this d block")
    pinned = [k for k in e_sigma if f"e_σ({k})" in at_bound]
    if pinned:
        found.append(f"{', '.join(f'e_σ({k})' for k in pinned)} held at 0 by the bound: the unbounded fit makes "
                     f"{'it' if len(pinned) == 1 else 'them'} negative")
    strong_pi = [k for k in e_sigma if abs(e_pi[k]) > e_sigma[k] and k not in pinned]
    if strong_pi:
        found.append(f"|e_π| > e_σ for {', '.join(strong_pi)}")
    return found


def _name(label) -> str:
    return "e_ds" if label == "ds" else f"e_{'σ' if label[0] == 'sigma' else 'π'}({label[1]})"
