"""Thermochemistry: standard entropies and enthalpies of small molecules, the quasi-RRHO treatment of low modes."""

import numpy as np
import pytest
from ase import Atoms

from fourfold.chem.complex import complex_from_formula
from fourfold.compute.hessian import harmonic_analysis, xtb_hessian
from fourfold.compute.relax import relax
from fourfold.compute.thermo import (
    free_rotor_entropy_j_mol_k,
    harmonic_entropy_j_mol_k,
    qrrho_entropy_j_mol_k,
    qrrho_weight,
    thermochemistry,
)
from fourfold.compute.xtb_engine import XtbPotential
from fourfold.errors import InputError
from fourfold.geometry.builder import build
from fourfold.units import ATOMIC_MASS_KG, HARTREE_EV, HARTREE_KJ_MOL, convert_energy, hartree_per_kelvin_to_j_mol_k


def diatomic(symbols, distance_angstrom):
    return Atoms(symbols, positions=[[0, 0, 0], [0, 0, distance_angstrom]])


def water():
    # Experimental equilibrium geometry r(OH) 0.9572 Å, HOH 104.52° (NIST CCCBDB experimental data; from memory).
    half = np.radians(104.52 / 2)
    r = 0.9572
    return Atoms("OH2", positions=[[0, 0, 0], [r * np.sin(half), 0, r * np.cos(half)],
                                   [-r * np.sin(half), 0, r * np.cos(half)]])


# Standard entropies S°(298.15 K, 1 bar) in J/(mol K) and H°(298.15 K) − H°(0) in kJ/mol: CO 197.660 and
# 8.671, H2O(g) 188.835 and 9.905, O2 205.152 and 8.680 (J. D. Cox, D. D. Wagman, V. A. Medvedev, CODATA Key
# Values for Thermodynamics, Hemisphere 1989; from memory). Inputs: CO r 1.128 Å, ν 2143 cm⁻¹; H2O
# fundamentals 3657, 1595, 3756 cm⁻¹; O2 r 1.2075 Å, ν 1556 cm⁻¹, triplet ground state (NIST CCCBDB
# experimental data; K. P. Huber, G. Herzberg, Constants of Diatomic Molecules, 1979; from memory).
@pytest.mark.parametrize("atoms, frequencies_cm, spin2s, sigma, entropy_j_mol_k, thermal_kj_mol", [
    (diatomic("CO", 1.128), [2143.0], 0, 1, 197.660, 8.671),
    (water(), [3657.0, 1595.0, 3756.0], 0, 2, 188.835, 9.905),
    (diatomic("O2", 1.2075), [1556.0], 2, 2, 205.152, 8.680),
])
def test_standard_entropy_and_enthalpy_of_small_molecules(atoms, frequencies_cm, spin2s, sigma, entropy_j_mol_k,
                                                          thermal_kj_mol):
    result = thermochemistry(atoms, frequencies_cm, spin2s)
    assert result.symmetry_number == sigma
    assert hartree_per_kelvin_to_j_mol_k(result.entropy_hartree_per_k) == pytest.approx(entropy_j_mol_k, abs=0.5)
    # H(T) − H(0): the enthalpy above the zero-point level.
    thermal = (result.enthalpy_hartree - result.zpe_hartree) * HARTREE_KJ_MOL
    assert thermal == pytest.approx(thermal_kj_mol, abs=0.05)
    assert result.gibbs_hartree == pytest.approx(result.enthalpy_hartree
                                                 - result.temperature_k * result.entropy_hartree_per_k, abs=1e-12)
    # ZPE = ½ Σ hν (common practice, no source): 1 cm⁻¹ is 1/219474.63 Eh.
    assert result.zpe_hartree == pytest.approx(0.5 * sum(frequencies_cm) / 219474.6313632, rel=1e-6)


def test_electronic_energy_and_pressure_enter_as_expected():
    # G shifts one-for-one with E; S(p) = S(1 bar) − R ln(p / 1 bar) for an ideal gas (common practice, no source).
    atoms = diatomic("CO", 1.128)
    base = thermochemistry(atoms, [2143.0], 0)
    shifted = thermochemistry(atoms, [2143.0], 0, electronic_hartree=-113.0, pressure_pa=1e6)
    assert shifted.enthalpy_hartree == pytest.approx(base.enthalpy_hartree - 113.0, abs=1e-12)
    drop = hartree_per_kelvin_to_j_mol_k(base.entropy_hartree_per_k - shifted.entropy_hartree_per_k)
    assert drop == pytest.approx(8.314462618 * np.log(10.0), rel=1e-5)


def test_qrrho_keeps_stiff_modes_harmonic_and_turns_soft_ones_into_rotors():
    # Grimme, Chem. Eur. J. 2012, 18, 9955: w = 1/(1 + (ω0/ν)^4), ω0 = 100 cm⁻¹; a mode far above ω0 keeps
    # its harmonic entropy, one far below gets the free-rotor entropy, and at ω0 the two count half each.
    temperature_k = 298.15
    assert qrrho_weight(100.0) == pytest.approx(0.5)
    stiff, soft = 1000.0, 10.0
    assert qrrho_entropy_j_mol_k(stiff, temperature_k) == pytest.approx(
        harmonic_entropy_j_mol_k(stiff, temperature_k), rel=1e-3)
    assert qrrho_entropy_j_mol_k(soft, temperature_k) == pytest.approx(
        free_rotor_entropy_j_mol_k(soft, temperature_k), rel=1e-3)
    # The point of the method: below ω0 the rotor entropy is the smaller, so soft modes count less.
    below = np.array([5.0, 20.0, 50.0])
    assert (qrrho_entropy_j_mol_k(below, temperature_k) < harmonic_entropy_j_mol_k(below, temperature_k)).all()


def test_qrrho_entropy_agrees_with_ase_modes():
    # Internal cross-check against ASE's own per-mode implementation of Grimme's scheme (recent ASE only),
    # given the same ω0 and B_av; ASE uses CODATA 2014 constants, hence the 1e-5 tolerance.
    modes = pytest.importorskip("ase.thermochemistry")
    if not hasattr(modes, "RRHOMode"):
        pytest.skip("this ASE has no RRHOMode")
    inertia_amu_angstrom2 = 1e-44 / (ATOMIC_MASS_KG * 1e-20)
    for frequency_cm in (10.0, 60.0, 100.0, 300.0):
        mode = modes.RRHOMode(convert_energy(frequency_cm, "cm", "ev"), inertia_amu_angstrom2, tau=100.0)
        theirs = hartree_per_kelvin_to_j_mol_k(mode.get_entropy(298.15, contributions=False) / HARTREE_EV)
        assert qrrho_entropy_j_mol_k(frequency_cm, 298.15) == pytest.approx(theirs, rel=1e-5)


def test_head_gordon_correction_lowers_soft_mode_enthalpy_towards_half_rt():
    # Li, Gomes, Sharada, Bell, Head-Gordon, J. Phys. Chem. C 2015, 119, 1840: a soft mode's vibrational
    # energy (with its ZPE) moves towards RT/2 with the same weight. For H2O's stiff modes the correction
    # vanishes; with the quasi-RRHO entropy off, S is ASE's harmonic one.
    atoms = water()
    stiff = thermochemistry(atoms, [3657.0, 1595.0, 3756.0], 0, head_gordon=True)
    assert abs(stiff.head_gordon_enthalpy_correction_hartree) * HARTREE_KJ_MOL < 1e-3
    harmonic = thermochemistry(atoms, [3657.0, 1595.0, 3756.0], 0, quasi_rrho=False)
    assert harmonic.qrrho_entropy_correction_hartree_per_k == 0.0
    assert harmonic.entropy_hartree_per_k == pytest.approx(stiff.entropy_hartree_per_k, rel=1e-6)
    # The soft limit: a 10 cm⁻¹ mode holds about RT classically and the rotor RT/2, so H drops by ≈ RT/2
    # (a limit of the formula, with the bend replaced by a 10 cm⁻¹ mode to isolate it).
    soft = thermochemistry(atoms, [10.0, 3657.0, 3756.0], 0, head_gordon=True)
    half_rt_kj_mol = 0.5 * 8.314462618e-3 * 298.15
    assert soft.head_gordon_enthalpy_correction_hartree * HARTREE_KJ_MOL == pytest.approx(-half_rt_kj_mol, rel=0.01)


def test_imaginary_modes_counted_and_bad_input_refused():
    atoms = water()
    result = thermochemistry(atoms, [-150.0, 3657.0, 3756.0], 0)
    assert result.n_imaginary == 1
    with pytest.raises(InputError, match="3 vibrations"):
        thermochemistry(atoms, [1595.0, 3657.0], 0)
    with pytest.raises(InputError, match="zero frequency"):
        thermochemistry(atoms, [0.0, 3657.0, 3756.0], 0)
    with pytest.raises(InputError, match="temperature and pressure"):
        thermochemistry(atoms, [1595.0, 3657.0, 3756.0], 0, temperature_k=0.0)


@pytest.mark.slow
def test_tetrahedral_phosphine_complex_has_the_larger_entropy():
    # The planar ⇌ tetrahedral equilibria of NiX2(PR3)2 in solution have ΔS° > 0 towards the tetrahedral
    # (triplet) form, which entropy favours (L. Que, L. H. Pignolet, Inorg. Chem. 1973, 12, 156; from memory
    # for the sign). Checked at GFN2-xTB on NiCl2(PMe3)2: T-4 triplet against the trans SP-4 singlet, both
    # relaxed freely to tight criteria (measured here: ΔS ≈ +35 J/(mol K), R ln 3 = 9.1 of it from the spin).
    cx = complex_from_formula("[NiCl2(PMe3)2]")
    entropy = {}
    for arrangement, isomer, spin2s in (("T-4", None, 2), ("SP-4", "trans", 0)):
        start = build(cx, arrangement, isomer)
        potential = XtbPotential(start.get_chemical_symbols(), cx.charge, spin2s)
        outcome = relax(start, potential, "free", arrangement, convergence="tight", max_steps=300)
        assert outcome.converged
        vibrations = harmonic_analysis(outcome.atoms, xtb_hessian(outcome.atoms, cx.charge, spin2s))
        result = thermochemistry(outcome.atoms, vibrations.frequencies_cm, spin2s, outcome.energy_hartree)
        assert result.n_imaginary == 0
        entropy[arrangement] = hartree_per_kelvin_to_j_mol_k(result.entropy_hartree_per_k)
    assert entropy["T-4"] - entropy["SP-4"] > 0.0
