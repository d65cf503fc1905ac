"""CODATA 2018 constants and the only unit conversions in fourfold.

Values: CODATA 2018 (E. Tiesinga, P. J. Mohr, D. B. Newell, B. N. Taylor, Rev. Mod. Phys. 93, 025010, 2021),
as bundled in SciPy's ``_codata.txt2018``. PySCF's ``pyscf.data.nist`` uses older sets (CODATA 2010/2014),
so conversions are never taken from there.
"""

from __future__ import annotations

from dataclasses import dataclass

HARTREE_EV = 27.211386245988
HARTREE_CM = 219474.63136320
HARTREE_JOULE = 4.3597447222071e-18
AVOGADRO_PER_MOL = 6.02214076e23
BOHR_ANGSTROM = 0.529177210903
CAL_JOULE = 4.184  # thermochemical calorie

# Exact SI defining constants and the CODATA 2018 atomic mass constant (for frequencies and thermochemistry).
SPEED_OF_LIGHT_M_PER_S = 299792458.0
PLANCK_JOULE_SECOND = 6.62607015e-34
BOLTZMANN_JOULE_PER_K = 1.380649e-23
ATOMIC_MASS_KG = 1.66053906660e-27
BAR_PASCAL = 1.0e5
GAS_CONSTANT_J_PER_MOL_K = BOLTZMANN_JOULE_PER_K * AVOGADRO_PER_MOL
HARTREE_KELVIN = HARTREE_JOULE / BOLTZMANN_JOULE_PER_K

HARTREE_KJ_MOL = HARTREE_JOULE * AVOGADRO_PER_MOL / 1000.0
HARTREE_KCAL_MOL = HARTREE_KJ_MOL / CAL_JOULE

# energy unit name -> size of one hartree in that unit
_PER_HARTREE = {
    "hartree": 1.0,
    "kj_mol": HARTREE_KJ_MOL,
    "kcal_mol": HARTREE_KCAL_MOL,
    "ev": HARTREE_EV,
    "cm": HARTREE_CM,
}

# names a user may type -> canonical unit name
UNIT_ALIASES = {
    "hartree": "hartree", "eh": "hartree", "au": "hartree",
    "kj": "kj_mol", "kj_mol": "kj_mol", "kj/mol": "kj_mol",
    "kcal": "kcal_mol", "kcal_mol": "kcal_mol", "kcal/mol": "kcal_mol",
    "ev": "ev",
    "cm": "cm", "cm-1": "cm", "cm^-1": "cm", "wavenumber": "cm",
}

UNIT_LABELS = {
    "hartree": "Eh", "kj_mol": "kJ/mol", "kcal_mol": "kcal/mol", "ev": "eV", "cm": "cm⁻¹",
}


@dataclass(frozen=True)
class EnergyUnit:
    """How one energy unit is written everywhere: in prose (``label``), in a table header (``header``), in
    LaTeX (``tex``), as a machine column suffix (``suffix``), with
    ``digits`` decimals (about 0.1 kJ/mol in every unit)."""

    name: str  # canonical name, a key of _PER_HARTREE
    label: str
    header: str
    tex: str
    suffix: str
    digits: int

    def from_kj_mol(self, value_kj_mol):
        """A kJ/mol value (or None) in this unit."""
        return None if value_kj_mol is None else convert_energy(value_kj_mol, "kj_mol", self.name)


_ENERGY_UNITS = {
    "kj_mol": EnergyUnit("kj_mol", "kJ/mol", "kJ mol⁻¹", r"kJ\,mol$^{-1}$", "kj_mol", 1),
    "kcal_mol": EnergyUnit("kcal_mol", "kcal/mol", "kcal mol⁻¹", r"kcal\,mol$^{-1}$", "kcal_mol", 1),
    "ev": EnergyUnit("ev", "eV", "eV", "eV", "ev", 3),
    "cm": EnergyUnit("cm", "cm⁻¹", "cm⁻¹", r"cm$^{-1}$", "cm-1", 0),
    "hartree": EnergyUnit("hartree", "Eh", "Eh", r"$E_\mathrm{h}$", "hartree", 5),
}
REPORT_UNITS = ("kj", "kcal", "ev", "cm")  # the units reports are written in (hartree stays in the raw columns)


def energy_unit(name: str) -> EnergyUnit:
    """The EnergyUnit record of a user-typed unit name ('kj', 'kcal/mol', 'cm-1', …)."""
    return _ENERGY_UNITS[canonical_unit(name)]


def canonical_unit(name: str) -> str:
    """Canonical energy-unit name for a user-typed one; InputError lists the valid names."""
    from .errors import InputError

    key = name.strip().lower()
    if key not in UNIT_ALIASES:
        raise InputError(f"unknown energy unit '{name}': use one of kj, kcal, ev, cm, hartree")
    return UNIT_ALIASES[key]


def convert_energy(value, from_unit: str, to_unit: str):
    """Convert an energy (scalar or numpy array) between any two units named in UNIT_ALIASES."""
    src, dst = canonical_unit(from_unit), canonical_unit(to_unit)
    return value * (_PER_HARTREE[dst] / _PER_HARTREE[src])


def hartree_to_kj_mol(energy_hartree):
    return energy_hartree * HARTREE_KJ_MOL


def cm_to_kj_mol(energy_cm):
    return energy_cm * (HARTREE_KJ_MOL / HARTREE_CM)


def kj_mol_to_cm(energy_kj_mol):
    return energy_kj_mol * (HARTREE_CM / HARTREE_KJ_MOL)


def hartree_per_kelvin_to_j_mol_k(entropy_hartree_per_k):
    """Entropy per molecule in Eh/K to J/(mol K)."""
    return entropy_hartree_per_k * HARTREE_JOULE * AVOGADRO_PER_MOL


def wavenumber_cm_from_eigenvalue(eigenvalue_hartree_per_bohr2_amu):
    """Harmonic wavenumber (cm⁻¹) of a mass-weighted Hessian eigenvalue in Eh/(bohr² amu).

    ν̃ = √λ / (2π c); a negative eigenvalue gives a negative number (an imaginary frequency).
    """
    import numpy as np

    scale_per_second = np.sqrt(HARTREE_JOULE / ATOMIC_MASS_KG) / (BOHR_ANGSTROM * 1e-10)
    value = np.asarray(eigenvalue_hartree_per_bohr2_amu, dtype=float)
    return np.sign(value) * np.sqrt(np.abs(value)) * scale_per_second / (2.0 * np.pi * SPEED_OF_LIGHT_M_PER_S * 100.0)


def bohr_to_angstrom(distance_bohr):
    return distance_bohr * BOHR_ANGSTROM


def angstrom_to_bohr(distance_angstrom):
    return distance_angstrom / BOHR_ANGSTROM
