"""Thermochemistry of one structure: ZPE, H(T), S(T), G(T) from its harmonic frequencies.

Model: ideal gas, rigid rotor, harmonic oscillator, from ASE's ``ase.thermochemistry.IdealGasThermo``
(translation, rotation with the structure's rotational symmetry number, electronic entropy R ln(2S + 1)
from the spin, harmonic vibrations; energies in eV, entropies in eV/K, pressure in Pa, reference
pressure 1 bar; its internal constants are CODATA 2014, which differ from CODATA 2018 by under 1e-6
relative). Its results are converted to hartree here with fourfold.units.

Standard state: ideal gas at 1 bar (100 000 Pa) and the given temperature (default 298.15 K). No
1 bar → 1 mol/L conversion is applied: it is the same for every isomer and spin state of one complex, so
it cancels in the ΔG between them. With a continuum-solvent level the electronic energy carries the
solvation; the thermal terms stay the gas-phase ones of the structure at that level.

Low modes: metal complexes have many soft modes whose harmonic entropy diverges as ν → 0. On top of
ASE's terms, Grimme's quasi-RRHO entropy (S. Grimme, Chem. Eur. J. 2012, 18, 9955,
doi:10.1002/chem.201200497) replaces each mode's harmonic entropy S_V by w S_V + (1 − w) S_R, with S_R the
entropy of a free rotor of moment μ' = μ B_av / (μ + B_av), μ = h / (8π²ν), B_av = 1e-44 kg m², and the
weight w = 1 / (1 + (ω0 / ν)^α), ω0 = 100 cm⁻¹, α = 4 (all from that paper). Optionally, the same
weight interpolates each mode's vibrational energy (with its ZPE) towards the free rotor's RT/2 (Y.-P. Li,
J. Gomes, S. M. Sharada, A. T. Bell, M. Head-Gordon, J. Phys. Chem. C 2015, 119, 1840,
doi:10.1021/jp509921r; the form as we recall it). ASE's ``IdealGasThermo`` has no such treatment of its
own (its quasi-RRHO classes in recent versions leave out translation and rotation), so both corrections
are computed here, per mode, with CODATA 2018 constants, and reported as separate numbers.

Imaginary modes: every imaginary frequency enters as its absolute value (as Grimme's quasi-RRHO does with
small imaginary modes of soft motions), so G is defined for any structure; ``n_imaginary`` counts the
modes beyond the imaginary-mode threshold, and a structure with any is not a minimum and must say so.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..geometry.symmetry import is_linear, symmetry_number
from ..units import (
    AVOGADRO_PER_MOL,
    BAR_PASCAL,
    BOLTZMANN_JOULE_PER_K,
    GAS_CONSTANT_J_PER_MOL_K,
    HARTREE_EV,
    HARTREE_JOULE,
    PLANCK_JOULE_SECOND,
    SPEED_OF_LIGHT_M_PER_S,
    convert_energy,
)
from .hessian import IMAGINARY_THRESHOLD_CM, imaginary_modes

STANDARD_TEMPERATURE_K = 298.15
STANDARD_PRESSURE_PA = BAR_PASCAL
QRRHO_OMEGA0_CM = 100.0
QRRHO_ALPHA = 4
QRRHO_AVERAGE_INERTIA_KG_M2 = 1e-44


@dataclass(frozen=True)
class Thermochemistry:
    """Thermochemistry of one structure at ``temperature_k`` and ``pressure_pa`` (per molecule, hartree).

    ``enthalpy_hartree`` = E + ZPE + thermal energy + kT (with the quasi-RRHO enthalpy correction when
    ``head_gordon``); ``entropy_hartree_per_k`` includes the quasi-RRHO entropy correction when
    ``quasi_rrho``; ``gibbs_hartree`` = H − T S. The two corrections are also given on their own.
    """

    temperature_k: float
    pressure_pa: float
    electronic_hartree: float
    zpe_hartree: float
    enthalpy_hartree: float
    entropy_hartree_per_k: float
    gibbs_hartree: float
    qrrho_entropy_correction_hartree_per_k: float
    head_gordon_enthalpy_correction_hartree: float
    symmetry_number: int
    spin2s: int
    linear: bool
    quasi_rrho: bool
    head_gordon: bool
    n_imaginary: int


def _mode_x(frequencies_cm, temperature_k: float) -> np.ndarray:
    """hν / kT of each mode."""
    energy_joule = PLANCK_JOULE_SECOND * SPEED_OF_LIGHT_M_PER_S * 100.0 * np.asarray(frequencies_cm, dtype=float)
    return energy_joule / (BOLTZMANN_JOULE_PER_K * temperature_k)


def harmonic_entropy_j_mol_k(frequencies_cm, temperature_k: float) -> np.ndarray:
    """Harmonic-oscillator entropy of each mode, R [x / (eˣ − 1) − ln(1 − e⁻ˣ)], x = hν/kT."""
    x = _mode_x(frequencies_cm, temperature_k)
    return GAS_CONSTANT_J_PER_MOL_K * (x / np.expm1(x) - np.log(-np.expm1(-x)))


def free_rotor_entropy_j_mol_k(frequencies_cm, temperature_k: float) -> np.ndarray:
    """Free-rotor entropy standing in for each mode (Grimme 2012, eqs. 4–6): R [½ + ln √(8π³μ'kT/h²)]."""
    nu_per_second = SPEED_OF_LIGHT_M_PER_S * 100.0 * np.asarray(frequencies_cm, dtype=float)
    moment = PLANCK_JOULE_SECOND / (8.0 * np.pi ** 2 * nu_per_second)
    reduced = moment * QRRHO_AVERAGE_INERTIA_KG_M2 / (moment + QRRHO_AVERAGE_INERTIA_KG_M2)
    argument = 8.0 * np.pi ** 3 * reduced * BOLTZMANN_JOULE_PER_K * temperature_k / PLANCK_JOULE_SECOND ** 2
    return GAS_CONSTANT_J_PER_MOL_K * (0.5 + 0.5 * np.log(argument))


def qrrho_weight(frequencies_cm) -> np.ndarray:
    """Grimme's damping weight w = 1 / (1 + (ω0/ν)^α): 1 for stiff modes, 0 for soft ones, ½ at ω0."""
    return 1.0 / (1.0 + (QRRHO_OMEGA0_CM / np.asarray(frequencies_cm, dtype=float)) ** QRRHO_ALPHA)


def qrrho_entropy_j_mol_k(frequencies_cm, temperature_k: float) -> np.ndarray:
    """Grimme's quasi-RRHO entropy of each mode, w S_V + (1 − w) S_R."""
    weight = qrrho_weight(frequencies_cm)
    return (weight * harmonic_entropy_j_mol_k(frequencies_cm, temperature_k)
            + (1.0 - weight) * free_rotor_entropy_j_mol_k(frequencies_cm, temperature_k))


def harmonic_energy_j_mol(frequencies_cm, temperature_k: float) -> np.ndarray:
    """Vibrational energy of each harmonic mode with its zero-point energy, N_A hν (½ + 1/(eˣ − 1))."""
    x = _mode_x(frequencies_cm, temperature_k)
    return GAS_CONSTANT_J_PER_MOL_K * temperature_k * x * (0.5 + 1.0 / np.expm1(x))


def _per_molecule_hartree(value_j_mol):
    return value_j_mol / (HARTREE_JOULE * AVOGADRO_PER_MOL)


def _vibrational_frequencies(atoms, frequencies_cm, linear: bool) -> np.ndarray:
    frequencies = np.asarray(frequencies_cm, dtype=float).ravel()
    expected = 3 * len(atoms) - (5 if linear else 6)
    if len(frequencies) != expected:
        raise InputError(f"{len(atoms)} atoms ({'linear' if linear else 'non-linear'}) have {expected} vibrations, "
                         f"got {len(frequencies)} frequencies")
    if (np.abs(frequencies) < 1e-3).any():
        raise InputError("a vibration has zero frequency: the Hessian still holds a translation or rotation")
    return np.abs(frequencies)


def thermochemistry(atoms, frequencies_cm, spin2s: int, electronic_hartree: float = 0.0,
                    temperature_k: float = STANDARD_TEMPERATURE_K, pressure_pa: float = STANDARD_PRESSURE_PA,
                    sigma: int | None = None, quasi_rrho: bool = True, head_gordon: bool = False,
                    imaginary_threshold_cm: float = IMAGINARY_THRESHOLD_CM) -> Thermochemistry:
    """ZPE, H, S and G of ``atoms`` from its 3N − 6 (linear 3N − 5) frequencies in cm⁻¹ (imaginary negative).

    ``sigma``: the rotational symmetry number, found from the structure when None. ``spin2s`` gives the
    electronic entropy R ln(2S + 1) (spin only: an orbitally degenerate ground term would add more).
    """
    from ase.thermochemistry import IdealGasThermo

    if not temperature_k > 0 or not pressure_pa > 0:
        raise InputError(f"temperature and pressure must be positive, got {temperature_k} K and {pressure_pa} Pa")
    if spin2s < 0:
        raise InputError(f"2S must be zero or positive, got {spin2s}")
    if len(atoms) < 2:
        raise InputError("thermochemistry needs a molecule of at least two atoms")
    linear = is_linear(atoms)
    frequencies = _vibrational_frequencies(atoms, frequencies_cm, linear)
    sigma = symmetry_number(atoms) if sigma is None else int(sigma)
    ideal_gas = IdealGasThermo(
        vib_energies=list(convert_energy(np.sort(frequencies), "cm", "ev")),
        geometry="linear" if linear else "nonlinear", potentialenergy=0.0, atoms=atoms,
        symmetrynumber=sigma, spin=spin2s / 2.0)
    zpe = ideal_gas.get_ZPE_correction() / HARTREE_EV
    enthalpy = ideal_gas.get_enthalpy(temperature_k, verbose=False) / HARTREE_EV
    entropy = ideal_gas.get_entropy(temperature_k, pressure_pa, verbose=False) / HARTREE_EV
    entropy_correction = 0.0
    if quasi_rrho:
        entropy_correction = _per_molecule_hartree(np.sum(qrrho_entropy_j_mol_k(frequencies, temperature_k)
                                                          - harmonic_entropy_j_mol_k(frequencies, temperature_k)))
    enthalpy_correction = 0.0
    if head_gordon:
        rotor_energy = 0.5 * GAS_CONSTANT_J_PER_MOL_K * temperature_k
        harmonic = harmonic_energy_j_mol(frequencies, temperature_k)
        damped = (1.0 - qrrho_weight(frequencies)) * (rotor_energy - harmonic)
        enthalpy_correction = _per_molecule_hartree(np.sum(damped))
    total_enthalpy = electronic_hartree + enthalpy + enthalpy_correction
    total_entropy = entropy + entropy_correction
    return Thermochemistry(
        temperature_k=float(temperature_k), pressure_pa=float(pressure_pa),
        electronic_hartree=float(electronic_hartree), zpe_hartree=float(zpe),
        enthalpy_hartree=float(total_enthalpy), entropy_hartree_per_k=float(total_entropy),
        gibbs_hartree=float(total_enthalpy - temperature_k * total_entropy),
        qrrho_entropy_correction_hartree_per_k=float(entropy_correction),
        head_gordon_enthalpy_correction_hartree=float(enthalpy_correction), symmetry_number=sigma,
        spin2s=int(spin2s), linear=linear, quasi_rrho=bool(quasi_rrho), head_gordon=bool(head_gordon),
        n_imaginary=len(imaginary_modes(frequencies_cm, imaginary_threshold_cm)))
