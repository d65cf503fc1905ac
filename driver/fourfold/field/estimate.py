"""The hand estimate: for every arrangement × isomer × 2S, the sum of three terms (all in cm⁻¹).

1. Ligand field: Σ n_i ε_i over the AOM d levels (fourfold.field.aom) with aufbau occupations for the
   given number of unpaired electrons (α electrons fill the lowest (n+2S)/2 levels, β the lowest (n−2S)/2).
   e_σ and e_π come from Jørgensen's rule Δo = f·g (Jørgensen 1971) through Δo = 3e_σ − 4e_π with
   e_π = r·e_σ (r = the ligand's pi_ratio), unless set directly. In SP-4 the d–s mixing term lowers z²
   (e_ds = e_ds_ratio · e_σ, ratio 0.2 by default: planar Cu/Ni chlorides have e_ds ≈ e_σ/4 … e_σ/5,
   Deeth & Gerloch 1984, from memory).
2. Spin pairing: Jørgensen's spin-pairing energy, E = D [⟨S(S+1)⟩ − S(S+1)] with
   D = (7/6)(5B/2 + C) for d shells and ⟨S(S+1)⟩ = (3/4) n (10 − n)/9 the average over the dⁿ
   configuration (C. K. Jørgensen, Modern Aspects of Ligand Field Theory, 1971, from memory; D follows
   exactly from Racah's d² term energies, which the tests check). B and C are the free-ion values reduced
   by the nephelauxetic ratio β = 1 − h·k (Jørgensen's h of the ligands, averaged, and k of the metal).
3. Ligand–ligand repulsion: E = Σ_{i<j} √(K_i K_j) / |u_i − u_j|⁶ over unit bond vectors, the
   inverse-sixth-power repulsion of Kepert's model of coordination polyhedra (D. L. Kepert, Inorganic
   Stereochemistry, Springer 1982, from memory). K is a fourfold default per ligand, not a literature
   value: it carries what the d electrons do not (bulk, ligand–ligand electrostatics).

Energies are relative to the lowest state of the complex. The estimate is a rough guide: what a
chemist does on paper, made explicit; every parameter can be overridden.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ..chem.complex import Complex
from ..chem.metals import Sourced
from ..errors import InputError
from ..geometry.isomers import isomers
from ..geometry.polyhedra import ARRANGEMENTS, unit_vectors
from ..units import cm_to_kj_mol
from .aom import aom_matrix, d_levels, level_labels, overlap_factors

DEFAULT_ARRANGEMENTS = ("T-4", "SP-4")
# Jørgensen's f·g is fitted to six-coordinate complexes; four-coordinate ones have shorter bonds and
# e_σ, e_π grow roughly as r⁻⁵…r⁻⁶ (common practice, no source). The factor 1.5 takes the f·g value of planar
# [CuCl4]2- (e_σ ≈ 2 900 cm⁻¹) towards its AOM fit (e_σ ≈ 5 000–6 000; Deeth & Gerloch, from memory) and keeps
# tetrahedral [NiCl4]2- (4 460) near its fitted 3 000–4 000 (from memory).
DEFAULT_E_SCALE = Sourced(1.5, "four-coordinate bond contraction factor on f·g values (fourfold default, see field/estimate.py)")
DEFAULT_E_DS_RATIO = Sourced(0.2, "e_ds ≈ e_σ/4…e_σ/5 for planar Cu/Ni chlorides (Deeth & Gerloch 1984, from memory)")
_LIGAND_KEYS = ("e_sigma", "e_pi", "f", "pi_ratio", "h", "repulsion")
_METAL_KEYS = ("B", "C", "g", "k")


@dataclass(frozen=True)
class LigandParameters:
    e_sigma_cm: Sourced
    e_pi_cm: Sourced
    h: Sourced
    repulsion_cm: Sourced


@dataclass(frozen=True)
class Parameters:
    """Everything the estimate uses, each number with its source."""

    ligands: dict[str, LigandParameters]
    racah_b_cm: Sourced
    racah_c_cm: Sourced
    k: Sourced
    beta: float
    pairing_d_cm: float
    e_ds_ratio: Sourced
    e_scale: Sourced

    def as_dict(self) -> dict:
        def pair(s: Sourced) -> dict:
            return {"value": s.value, "source": s.source}

        return {
            "ligands": {name: {"e_sigma_cm": pair(p.e_sigma_cm), "e_pi_cm": pair(p.e_pi_cm), "h": pair(p.h),
                               "repulsion_cm": pair(p.repulsion_cm)} for name, p in self.ligands.items()},
            "metal": {"B_cm": pair(self.racah_b_cm), "C_cm": pair(self.racah_c_cm), "k": pair(self.k)},
            "nephelauxetic_beta": self.beta,
            "pairing_D_cm": self.pairing_d_cm,
            "e_ds_ratio": pair(self.e_ds_ratio),
            "e_scale": pair(self.e_scale),
        }


@dataclass(frozen=True)
class StateEstimate:
    arrangement: str
    isomer: str
    spin2s: int
    levels_cm: tuple[float, ...]
    level_labels: tuple[str, ...]
    occupation: tuple[int, ...]  # electrons per level (0, 1, 2), ascending levels
    ligand_field_cm: float
    lfse_cm: float  # Σ n_i (ε_i − barycentre): the textbook LFSE, for display
    pairing_cm: float
    repulsion_cm: float
    energy_cm: float  # relative to the complex's lowest state

    @property
    def total_cm(self) -> float:
        return self.ligand_field_cm + self.pairing_cm + self.repulsion_cm

    @property
    def energy_kj_mol(self) -> float:
        return cm_to_kj_mol(self.energy_cm)


@dataclass(frozen=True)
class Estimate:
    formula: str
    d_electrons: int
    parameters: Parameters
    states: tuple[StateEstimate, ...]
    ground: StateEstimate = field(init=False)

    def __post_init__(self):
        object.__setattr__(self, "ground", min(self.states, key=lambda s: s.energy_cm))

    def state(self, arrangement: str, spin2s: int, isomer: str | None = None) -> StateEstimate:
        """Lowest state of this arrangement and spin (over isomers unless one is named)."""
        matches = [s for s in self.states if s.arrangement == arrangement and s.spin2s == spin2s
                   and (isomer is None or s.isomer == isomer)]
        if not matches:
            raise InputError(f"the estimate has no state {arrangement} {isomer or ''} 2S={spin2s}")
        return min(matches, key=lambda s: s.energy_cm)

    def delta_sp_t_cm(self) -> dict[int, float]:
        """E(SP-4) − E(T-4) per 2S (lowest isomer of each), when both arrangements were estimated."""
        arrangements = {s.arrangement for s in self.states}
        if not {"SP-4", "T-4"} <= arrangements:
            return {}
        spins = sorted({s.spin2s for s in self.states})
        return {s: self.state("SP-4", s).energy_cm - self.state("T-4", s).energy_cm for s in spins}

    def as_dict(self) -> dict:
        return {
            "formula": self.formula,
            "d_electrons": self.d_electrons,
            "states": [
                {"arrangement": s.arrangement, "isomer": s.isomer, "spin2s": s.spin2s,
                 "energy_cm": s.energy_cm, "energy_kj_mol": s.energy_kj_mol,
                 "terms": {"ligand_field_cm": s.ligand_field_cm, "pairing_cm": s.pairing_cm,
                           "repulsion_cm": s.repulsion_cm, "lfse_cm": s.lfse_cm},
                 "d_levels_cm": list(s.levels_cm), "d_level_labels": list(s.level_labels),
                 "occupation": list(s.occupation)}
                for s in self.states
            ],
            "ground": {"arrangement": self.ground.arrangement, "isomer": self.ground.isomer,
                       "spin2s": self.ground.spin2s},
            "delta_sp_minus_t_cm": {str(k): v for k, v in self.delta_sp_t_cm().items()},
            "delta_sp_minus_t_kj_mol": {str(k): cm_to_kj_mol(v) for k, v in self.delta_sp_t_cm().items()},
            "parameters": self.parameters.as_dict(),
        }


def parse_overrides(items) -> dict[str, float]:
    """'Cl.e_sigma=4000' strings (or a mapping) -> {'Cl.e_sigma': 4000.0}; InputError names the bad item."""
    if isinstance(items, dict):
        pairs = list(items.items())
    else:
        pairs = []
        for item in items:
            if "=" not in item:
                raise InputError(f"override '{item}' must look like LIGAND.e_sigma=VALUE or metal.B=VALUE")
            key, value = item.split("=", 1)
            pairs.append((key.strip(), value.strip()))
    overrides = {}
    for key, value in pairs:
        try:
            overrides[key] = float(value)
        except (TypeError, ValueError):
            raise InputError(f"override {key}={value!r}: the value must be a number") from None
        if not math.isfinite(overrides[key]):  # nan or inf would reach the eigensolver
            raise InputError(f"override {key}={value!r}: the value must be a finite number") from None
    return overrides


def parameters_for(cx: Complex, overrides: dict[str, float] | None = None) -> Parameters:
    """Default parameters for a complex with overrides applied (keys 'Cl.e_sigma', 'metal.B', 'e_ds_ratio')."""
    overrides = dict(overrides or {})
    _check_override_keys(cx, overrides)
    ox = cx.oxidation_state
    metal = cx.metal

    def take(key: str, default: Sourced) -> Sourced:
        return Sourced(overrides[key], "override") if key in overrides else default

    g = take("metal.g", metal.g(ox))
    e_scale = take("e_scale", DEFAULT_E_SCALE)
    ligands = {}
    for ligand in {lig.name: lig for lig in cx.ligands}.values():
        f = take(f"{ligand.name}.f", ligand.f)
        ratio = take(f"{ligand.name}.pi_ratio", ligand.pi_ratio)
        delta_o_cm = 1000.0 * f.value * g.value * e_scale.value
        e_sigma = Sourced(delta_o_cm / (3.0 - 4.0 * ratio.value),
                          f"Δ = {e_scale.value}·f·g = {e_scale.value}×{f.value}×{g.value} kK (f: {f.source}; g: {g.source}), "
                          f"e_π/e_σ = {ratio.value} ({ratio.source})")
        e_sigma = take(f"{ligand.name}.e_sigma", e_sigma)
        e_pi = take(f"{ligand.name}.e_pi", Sourced(ratio.value * e_sigma.value, f"e_π = {ratio.value}·e_σ ({ratio.source})"))
        ligands[ligand.name] = LigandParameters(
            e_sigma_cm=e_sigma, e_pi_cm=e_pi,
            h=take(f"{ligand.name}.h", ligand.h),
            repulsion_cm=take(f"{ligand.name}.repulsion", ligand.repulsion_cm),
        )
    b = take("metal.B", metal.racah_b(ox))
    c = take("metal.C", metal.racah_c(ox) if "metal.B" not in overrides
             else Sourced(4.7 * b.value, "C = 4.7 B (common practice, no source)"))
    k = take("metal.k", metal.k(ox))
    h_mean = float(np.mean([ligands[lig.name].h.value for lig in cx.ligands]))
    beta = max(0.3, 1.0 - h_mean * k.value)  # Jørgensen's linear rule is meant for β well above 0.3
    pairing_d_cm = beta * (7.0 / 6.0) * (2.5 * b.value + c.value)
    return Parameters(ligands, b, c, k, beta, pairing_d_cm, take("e_ds_ratio", DEFAULT_E_DS_RATIO), e_scale)


def _check_override_keys(cx: Complex, overrides: dict[str, float]) -> None:
    names = {lig.name for lig in cx.ligands}
    for key in overrides:
        head, _, tail = key.partition(".")
        if key in ("e_ds_ratio", "e_scale"):
            continue
        if head == "metal" and tail in _METAL_KEYS:
            continue
        if head in names and tail in _LIGAND_KEYS:
            continue
        raise InputError(
            f"cannot override '{key}' for {cx.formula}: use LIGAND.{{{','.join(_LIGAND_KEYS)}}} with LIGAND in "
            f"{sorted(names)}, metal.{{{','.join(_METAL_KEYS)}}}, e_ds_ratio or e_scale"
        )


def occupations(n_electrons: int, spin2s: int) -> np.ndarray:
    """Electrons per ascending d level for n electrons and 2S unpaired (aufbau within each spin)."""
    n_alpha, n_beta = (n_electrons + spin2s) // 2, (n_electrons - spin2s) // 2
    occupation = np.zeros(5, dtype=int)
    occupation[:n_alpha] += 1
    occupation[:n_beta] += 1
    return occupation


def pairing_energy_cm(n_electrons: int, spin2s: int, pairing_d_cm: float) -> float:
    """Jørgensen's spin-pairing energy D[⟨S(S+1)⟩ − S(S+1)] for dⁿ."""
    s = spin2s / 2.0
    average = 0.75 * n_electrons * (10 - n_electrons) / 9.0
    return pairing_d_cm * (average - s * (s + 1))


def repulsion_energy_cm(directions: np.ndarray, constants_cm: np.ndarray) -> float:
    """Kepert-type Σ_{i<j} √(K_i K_j)/|u_i − u_j|⁶ over unit vectors."""
    u = directions / np.linalg.norm(directions, axis=1, keepdims=True)
    total = 0.0
    for i in range(len(u)):
        for j in range(i + 1, len(u)):
            total += np.sqrt(constants_cm[i] * constants_cm[j]) / np.linalg.norm(u[i] - u[j]) ** 6
    return float(total)


def ligand_field_matrix_cm(directions: np.ndarray, per_site: list[LigandParameters], e_ds_ratio: float) -> np.ndarray:
    """AOM matrix with per-ligand e_σ, e_π and d–s mixing of strength e_ds,L = ratio·e_σ,L."""
    e_sigma = np.array([p.e_sigma_cm.value for p in per_site])
    e_pi = np.array([p.e_pi_cm.value for p in per_site])
    matrix = aom_matrix(directions, e_sigma, e_pi)
    # d–s mixing with ligand-specific strengths: −(Σ_L √e_ds,L F_σ,L)(…)ᵀ, equal ligands give the usual form
    weights = np.sqrt(np.clip(e_ds_ratio * e_sigma, 0.0, None))
    sigma_sum = sum(w * overlap_factors(d)[0] for w, d in zip(weights, directions))
    return matrix - np.outer(sigma_sum, sigma_sum)


def estimate(cx: Complex, arrangements=DEFAULT_ARRANGEMENTS, overrides: dict[str, float] | None = None,
             spins: tuple[int, ...] | None = None) -> Estimate:
    """Estimated energy of every arrangement × isomer × 2S of a complex (cm⁻¹, relative to the lowest)."""
    for arrangement in arrangements:
        if arrangement not in ARRANGEMENTS:
            raise InputError(f"unknown arrangement '{arrangement}': use one of {', '.join(ARRANGEMENTS)}")
    params = parameters_for(cx, overrides)
    spins = tuple(cx.check_spin(s) for s in spins) if spins else cx.allowed_spin2s
    n = cx.d_electrons
    names = tuple(lig.name for lig in cx.ligands)
    raw = []
    for arrangement in arrangements:
        directions = unit_vectors(arrangement)
        for isomer in isomers(names, arrangement):
            per_site = [params.ligands[names[i]] for i in isomer.order]
            matrix = ligand_field_matrix_cm(directions, per_site, params.e_ds_ratio.value)
            levels, characters = d_levels(matrix)
            labels = tuple(level_labels(characters))
            repulsion = repulsion_energy_cm(directions, np.array([p.repulsion_cm.value for p in per_site]))
            barycentre = levels.mean()
            for spin2s in spins:
                occ = occupations(n, spin2s)
                raw.append(dict(arrangement=arrangement, isomer=isomer.label, spin2s=spin2s,
                                levels_cm=tuple(float(x) for x in levels), level_labels=labels,
                                occupation=tuple(int(x) for x in occ),
                                ligand_field_cm=float(occ @ levels), lfse_cm=float(occ @ (levels - barycentre)),
                                pairing_cm=pairing_energy_cm(n, spin2s, params.pairing_d_cm),
                                repulsion_cm=repulsion))
    lowest = min(r["ligand_field_cm"] + r["pairing_cm"] + r["repulsion_cm"] for r in raw)
    states = tuple(StateEstimate(**r, energy_cm=r["ligand_field_cm"] + r["pairing_cm"] + r["repulsion_cm"] - lowest)
                   for r in raw)
    return Estimate(cx.formula, n, params, states)

