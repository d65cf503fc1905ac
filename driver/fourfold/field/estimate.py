"""The hand estimate: for every arrangement × isomer × 2S, the sum of three terms (all in cm⁻¹).

1. Ligand field: the ligand-field stabilisation Σ n_i (ε_i − ε̄), the AOM d levels (fourfold.field.aom) measured
   from their barycentre ε̄, with aufbau occupations for the given number of unpaired electrons (α electrons
   fill the lowest (n+2S)/2 levels, β the lowest (n−2S)/2). e_σ and e_π come from Jørgensen's rule Δo = f·g
   (Jørgensen 1971) through Δo = 3e_σ − 4e_π with e_π = r·e_σ (r = the ligand's pi_ratio), unless set
   directly. In SP-4 the d–s mixing term lowers z² (e_ds = e_ds_ratio · e_σ, ratio 0.2 by default: planar
   Cu/Ni chlorides have e_ds ≈ e_σ/4 … e_σ/5, Deeth & Gerloch 1984, from memory). The barycentre is the
   reference because the AOM's trace, Σ_L (e_σ + 2e_π), is the σ/π bonding energy the ligands gain whatever
   the arrangement (the sum rule; Schäffer 1970): it is paid back by the filled bonding orbitals, not by
   the d electrons. The d–s term alone changes the trace — its z² lowering is bonding density moved
   between the metal's d and s shares of the same a1g combination — so the d levels alone would count a
   bonding energy no arrangement gains: for a filled d¹⁰ shell every level is occupied and the whole shift
   would favour SP-4. From the barycentre, d¹⁰ (and d⁰) have no ligand-field term in any arrangement, as
   ligand-field theory has it (e.g. Figgis & Hitchman, Ligand Field Theory and its Applications, 2000,
   from memory), and the arrangement of a d¹⁰ ion is left to the ligands' repulsion.
2. Spin pairing: Jørgensen's spin-pairing energy, E = D [⟨S(S+1)⟩ − S(S+1)] with
   D = (7/6)(5B/2 + C) for d shells and ⟨S(S+1)⟩ = (3/4) n (10 − n)/9 the average over the dⁿ
   configuration (C. K. Jørgensen, Modern Aspects of Ligand Field Theory, 1971, from memory; D follows
   exactly from Racah's d² term energies, which the tests check). B and C are the free-ion values reduced
   by the nephelauxetic ratio β = 1 − h·k (Jørgensen's h of the ligands, averaged, and k of the metal).
3. Ligand–ligand repulsion, over pairs of donors not held by one chelate, in two parts:
   - steric, growing with the ligands' size: ε [(θ_i + θ_j) / 2φ_ij]^n, with φ_ij the angle between the two
     bonds and θ the ligands' cone angles (fourfold.geometry.cone, from the built fragments). It is the
     inverse-power repulsion of Kepert's model of coordination polyhedra (D. L. Kepert, Inorganic
     Stereochemistry, Springer 1982, from memory), a/d^n between ligand positions, with the distance taken
     along the sphere round the metal and measured in units of the pair's contact angle, half the sum of
     the two cones (Tolman, Chem. Rev. 1977, 77, 313, from memory): two ligands whose cones just touch repel
     by ε, bulkier ligands repel more at every angle. For equal ligands it orders the arrangements as
     Kepert's repulsion does (T-4 below SP-4).
   - electrostatic, between charged donors: s·q_i q_j e²/(4πε₀ r_ij) at the donors' distance r_ij (Kepert's
     n = 1 case), with s < 1 the share left by the metal's charge and covalency. A chelate's charge is
     split over its donors. This is what four anions feel and neutral phosphines do not.
   ε, n and s are fourfold's three calibrated constants, fitted on a training set of complexes with known
   structures (data/estimate_training.toml, benchmarks/estimate_score --calibrate) and scored on a
   validation set never used to tune them (data/estimate_validation.toml).

Energies are relative to the lowest state of the complex. The estimate is a rough guide: what a
chemist does on paper, made explicit; every parameter can be overridden.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from ..chem.complex import Complex
from ..chem.ligands import CUSTOM_SOURCE, Ligand
from ..chem.metals import Sourced
from ..errors import InputError
from ..geometry.builder import donor_directions, ml_distance_angstrom
from ..geometry.cone import TOLMAN_METAL_DONOR_ANGSTROM, cone_angle_deg, vdw_radius_angstrom
from ..geometry.isomers import isomers_of
from ..geometry.polyhedra import ARRANGEMENTS
from ..units import BOHR_ANGSTROM, HARTREE_CM, cm_to_kj_mol
from .aom import aom_matrix, d_levels, level_labels, overlap_factors

DEFAULT_ARRANGEMENTS = ("T-4", "SP-4")
# Jørgensen's f·g is fitted to six-coordinate complexes; four-coordinate ones have shorter bonds and
# e_σ, e_π grow roughly as r⁻⁵…r⁻⁶ (common practice, no source). The factor 1.5 takes the f·g value of planar
# [CuCl4]2- (e_σ ≈ 2 900 cm⁻¹) towards its AOM fit (e_σ ≈ 5 000–6 000; Deeth & Gerloch, from memory) and keeps
# tetrahedral [NiCl4]2- (4 460) near its fitted 3 000–4 000 (from memory).
DEFAULT_E_SCALE = Sourced(1.5, "four-coordinate bond contraction factor on f·g values (fourfold default, see field/estimate.py)")
DEFAULT_E_DS_RATIO = Sourced(0.2, "e_ds ≈ e_σ/4…e_σ/5 for planar Cu/Ni chlorides (Deeth & Gerloch 1984, from memory)")
# The three calibrated constants of the repulsion (module docstring, term 3): of the grid points that get all of
# the training set right, the one whose smallest margin is widest (benchmarks/estimate_score --calibrate:
# 21/21 at 21 of 2380 points, screening 0.05–0.25, n 1.5–3, ε 3 000–16 000 cm⁻¹; this one's margin 9.3 kJ/mol).
_CALIBRATION = "calibrated on data/estimate_training.toml (benchmarks/estimate_score --calibrate)"
DEFAULT_STERIC_SCALE = Sourced(16000.0, f"repulsion of two ligands whose cones touch; {_CALIBRATION}")
DEFAULT_STERIC_EXPONENT = Sourced(1.5, f"steepness of the repulsion; {_CALIBRATION}")
DEFAULT_SCREENING = Sourced(0.125, f"share of the bare Coulomb repulsion between charged donors; {_CALIBRATION}")
_LIGAND_KEYS = ("e_sigma", "e_pi", "f", "pi_ratio", "h", "cone")
_METAL_KEYS = ("B", "C", "g", "k")
_GLOBAL_KEYS = ("e_ds_ratio", "e_scale", "steric_scale", "steric_exponent", "screening")
COULOMB_CM_ANGSTROM = HARTREE_CM * BOHR_ANGSTROM  # e²/(4πε₀) = 1 hartree·bohr


@dataclass(frozen=True)
class LigandParameters:
    e_sigma_cm: Sourced
    e_pi_cm: Sourced
    h: Sourced
    cone_deg: Sourced  # steric size for the repulsion


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
    steric_scale_cm: Sourced
    steric_exponent: Sourced
    screening: Sourced

    def as_dict(self) -> dict:
        def pair(s: Sourced) -> dict:
            return {"value": s.value, "source": s.source}

        return {
            "ligands": {name: {"e_sigma_cm": pair(p.e_sigma_cm), "e_pi_cm": pair(p.e_pi_cm), "h": pair(p.h),
                               "cone_deg": pair(p.cone_deg)} for name, p in self.ligands.items()},
            "metal": {"B_cm": pair(self.racah_b_cm), "C_cm": pair(self.racah_c_cm), "k": pair(self.k)},
            "nephelauxetic_beta": self.beta,
            "pairing_D_cm": self.pairing_d_cm,
            "e_ds_ratio": pair(self.e_ds_ratio),
            "e_scale": pair(self.e_scale),
            "steric_scale_cm": pair(self.steric_scale_cm),
            "steric_exponent": pair(self.steric_exponent),
            "screening": pair(self.screening),
        }


@dataclass(frozen=True)
class StateEstimate:
    arrangement: str
    isomer: str
    spin2s: int
    levels_cm: tuple[float, ...]
    level_labels: tuple[str, ...]
    occupation: tuple[int, ...]  # electrons per level (0, 1, 2), ascending levels
    ligand_field_cm: float  # Σ n_i (ε_i − barycentre): the ligand-field stabilisation
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
    confidence_notes: tuple[str, ...] = ()  # one line per parameter that is a fallback, not a tabulated value
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
                           "repulsion_cm": s.repulsion_cm},
                 "d_levels_cm": list(s.levels_cm), "d_level_labels": list(s.level_labels),
                 "occupation": list(s.occupation)}
                for s in self.states
            ],
            "ground": {"arrangement": self.ground.arrangement, "isomer": self.ground.isomer,
                       "spin2s": self.ground.spin2s},
            "delta_sp_minus_t_cm": {str(k): v for k, v in self.delta_sp_t_cm().items()},
            "delta_sp_minus_t_kj_mol": {str(k): cm_to_kj_mol(v) for k, v in self.delta_sp_t_cm().items()},
            "parameters": self.parameters.as_dict(),
            "confidence_notes": list(self.confidence_notes),
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


def steric_cone_deg(ligand: Ligand) -> Sourced:
    """The ligand's size for the repulsion: its cone angle (mean over a chelate's donors), and never less
    than the cone of its donor atom alone (Tolman's cone leaves the donor out; a CO or CN⁻ is still as big as
    its carbon)."""
    value = _steric_cone_deg(ligand.symbols, ligand.denticity, ligand.positions_angstrom.tobytes(), ligand)
    return Sourced(value, "cone angle computed from the ligand's fragment (fourfold.geometry.cone; Bondi radii, M–donor 2.28 Å)")


@lru_cache(maxsize=256)
def _steric_cone_deg(symbols, denticity, coordinates: bytes, ligand: Ligand) -> float:
    # keyed by the fragment itself (symbols, coordinates), not the name: a recipe may reuse a bundled name
    cones = []
    for donor in range(denticity):
        sphere = np.degrees(2 * np.arcsin(vdw_radius_angstrom(symbols[donor]) / TOLMAN_METAL_DONOR_ANGSTROM))
        cones.append(max(cone_angle_deg(ligand, donor), sphere))
    return float(np.mean(cones))


def e_parameters_cm(f: Sourced, ratio: Sourced, g: Sourced, e_scale: Sourced) -> tuple[Sourced, Sourced]:
    """e_σ, e_π (cm⁻¹) from Jørgensen's Δ = f·g (times the four-coordination factor), Δ = 3e_σ − 4e_π, e_π = r·e_σ."""
    delta_cm = 1000.0 * f.value * g.value * e_scale.value
    e_sigma = Sourced(delta_cm / (3.0 - 4.0 * ratio.value),
                      f"Δ = {e_scale.value}·f·g = {e_scale.value}×{f.value}×{g.value} kK (f: {f.source}; g: {g.source}), "
                      f"e_π/e_σ = {ratio.value} ({ratio.source})")
    return e_sigma, Sourced(ratio.value * e_sigma.value, f"e_π = {ratio.value}·e_σ ({ratio.source})")


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
        ratio = take(f"{ligand.name}.pi_ratio", ligand.pi_ratio)
        e_sigma, _ = e_parameters_cm(take(f"{ligand.name}.f", ligand.f), ratio, g, e_scale)
        e_sigma = take(f"{ligand.name}.e_sigma", e_sigma)
        e_pi = take(f"{ligand.name}.e_pi", Sourced(ratio.value * e_sigma.value, f"e_π = {ratio.value}·e_σ ({ratio.source})"))
        ligands[ligand.name] = LigandParameters(
            e_sigma_cm=e_sigma, e_pi_cm=e_pi,
            h=take(f"{ligand.name}.h", ligand.h),
            cone_deg=take(f"{ligand.name}.cone", steric_cone_deg(ligand)),
        )
    b = take("metal.B", metal.racah_b(ox))
    c = take("metal.C", metal.racah_c(ox) if "metal.B" not in overrides
             else Sourced(4.7 * b.value, "C = 4.7 B (common practice, no source)"))
    k = take("metal.k", metal.k(ox))
    h_mean = float(np.mean([ligands[lig.name].h.value for lig in cx.ligands]))
    beta = max(0.3, 1.0 - h_mean * k.value)  # Jørgensen's linear rule is meant for β well above 0.3
    pairing_d_cm = beta * (7.0 / 6.0) * (2.5 * b.value + c.value)
    return Parameters(ligands, b, c, k, beta, pairing_d_cm, take("e_ds_ratio", DEFAULT_E_DS_RATIO), e_scale,
                      take("steric_scale", DEFAULT_STERIC_SCALE), take("steric_exponent", DEFAULT_STERIC_EXPONENT),
                      take("screening", DEFAULT_SCREENING))


def _check_override_keys(cx: Complex, overrides: dict[str, float]) -> None:
    names = {lig.name for lig in cx.ligands}
    for key in overrides:
        head, _, tail = key.partition(".")
        if key in _GLOBAL_KEYS:
            continue
        if head == "metal" and tail in _METAL_KEYS:
            continue
        if head in names and tail in _LIGAND_KEYS:
            continue
        raise InputError(
            f"cannot override '{key}' for {cx.formula}: use LIGAND.{{{','.join(_LIGAND_KEYS)}}} with LIGAND in "
            f"{sorted(names)}, metal.{{{','.join(_METAL_KEYS)}}}, or {', '.join(_GLOBAL_KEYS)}"
        )


def _is_fallback(source: str) -> bool:
    return "fallback" in source or "nearest tabulated" in source


def _is_untabulated(source: str) -> bool:
    return "no source" in source or source == CUSTOM_SOURCE


def confidence_notes(cx: Complex, params: Parameters) -> tuple[str, ...]:
    """One line for the metal when any of its g, B, k is a fallback, one per ligand whose f is placed by the
    series rather than tabulated: where the estimate stands on guesses."""
    notes = []
    ion = f"{cx.metal.symbol}({cx.oxidation_state:+d})"
    metal = {"g": cx.metal.g(cx.oxidation_state), "B": params.racah_b_cm, "k": params.k}
    guessed = [name for name, value in metal.items() if _is_fallback(value.source)]
    if guessed:
        closed = cx.d_electrons in (0, 10)
        notes.append(f"{ion} has no tabulated {', '.join(guessed)}: fourfold's fallbacks are used (see the parameters); "
                     + ("they do not enter here, a d0/d10 shell has no ligand-field or pairing term" if closed
                        else "the ligand-field and pairing terms are guesses for this metal"))
    for ligand in {lig.name: lig for lig in cx.ligands}.values():
        if _is_untabulated(ligand.f.source):
            notes.append(f"{ligand.name}: f (σ-donor strength) is not tabulated; placed by the spectrochemical series")
    return tuple(notes)


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


def repulsion_energy_cm(directions: np.ndarray, cones_deg, scale_cm: float, exponent: float, chelate_pairs=(),
                        charges=None, distances_angstrom=None, screening: float = 0.0) -> float:
    """Ligand–ligand repulsion over donor pairs not held by one chelate: Σ ε [(θ_i + θ_j) / 2φ_ij]^n (cone angles
    θ, bond angles φ) plus s·q_i q_j e²/(4πε₀ r_ij) between charged donors r_ij apart."""
    u = directions / np.linalg.norm(directions, axis=1, keepdims=True)
    half_rad = np.radians(np.asarray(cones_deg, dtype=float)) / 2.0
    bound = {frozenset(pair) for pair in chelate_pairs}
    positions = None if charges is None else u * np.asarray(distances_angstrom, dtype=float)[:, None]
    total = 0.0
    for i in range(len(u)):
        for j in range(i + 1, len(u)):
            if frozenset((i, j)) in bound:
                continue
            angle_rad = np.arccos(np.clip(u[i] @ u[j], -1.0, 1.0))
            total += scale_cm * ((half_rad[i] + half_rad[j]) / angle_rad) ** exponent
            if positions is not None and screening:
                total += screening * COULOMB_CM_ANGSTROM * charges[i] * charges[j] / np.linalg.norm(positions[i] - positions[j])
    return float(total)


def ligand_field_matrix_cm(directions: np.ndarray, per_site: list[LigandParameters], e_ds_ratio: float) -> np.ndarray:
    """AOM matrix with per-ligand e_σ, e_π and d–s mixing of strength e_ds,L = ratio·e_σ,L."""
    e_sigma = np.array([p.e_sigma_cm.value for p in per_site])
    e_pi = np.array([p.e_pi_cm.value for p in per_site])
    matrix = aom_matrix(directions, e_sigma, e_pi)
    # d–s mixing with ligand-specific strengths: −(Σ_L √e_ds,L F_σ,L)(…)ᵀ, equal ligands give the usual form
    weights = np.sqrt(np.clip(e_ds_ratio * e_sigma, 0.0, None))
    sigma_sum = sum(w * overlap_factors(d)[0] for w, d in zip(weights, directions, strict=False))
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
    raw = []
    for arrangement in arrangements:
        for isomer in isomers_of(cx, arrangement):
            directions = donor_directions(cx, isomer)
            per_site = [params.ligands[cx.ligands[cx.sites[i][0]].name] for i in isomer.order]
            position = {site: k for k, site in enumerate(isomer.order)}
            chelates = [(position[a], position[b]) for a, b in cx.chelate_site_pairs]
            matrix = ligand_field_matrix_cm(directions, per_site, params.e_ds_ratio.value)
            levels, characters = d_levels(matrix)
            labels = tuple(level_labels(characters))
            site_ligands = [cx.ligands[cx.sites[i][0]] for i in isomer.order]
            charges = [lig.charge / lig.denticity for lig in site_ligands]
            dist = [ml_distance_angstrom(cx, cx.ligands[cx.sites[i][0]], cx.sites[i][1]) for i in isomer.order]
            repulsion = repulsion_energy_cm(directions, [p.cone_deg.value for p in per_site], params.steric_scale_cm.value,
                                            params.steric_exponent.value, chelates, charges, dist, params.screening.value)
            barycentre = levels.mean()
            for spin2s in spins:
                occ = occupations(n, spin2s)
                raw.append(dict(arrangement=arrangement, isomer=isomer.label, spin2s=spin2s,
                                levels_cm=tuple(float(x) for x in levels), level_labels=labels,
                                occupation=tuple(int(x) for x in occ),
                                ligand_field_cm=float(occ @ (levels - barycentre)),
                                pairing_cm=pairing_energy_cm(n, spin2s, params.pairing_d_cm),
                                repulsion_cm=repulsion))
    lowest = min(r["ligand_field_cm"] + r["pairing_cm"] + r["repulsion_cm"] for r in raw)
    states = tuple(StateEstimate(**r, energy_cm=r["ligand_field_cm"] + r["pairing_cm"] + r["repulsion_cm"] - lowest)
                   for r in raw)
    return Estimate(cx.formula, n, params, states, confidence_notes(cx, params))
