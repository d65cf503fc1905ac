"""Energy conversions against CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 2021 [V])."""

import pytest

from fourfold import units
from fourfold.errors import InputError


def test_hartree_conversions_codata_2018():
    assert units.HARTREE_KJ_MOL == pytest.approx(2625.49963948, rel=1e-10)
    assert units.HARTREE_KCAL_MOL == pytest.approx(627.50947406, rel=1e-10)
    assert units.convert_energy(1.0, "hartree", "ev") == pytest.approx(27.211386245988, rel=1e-12)
    assert units.convert_energy(1.0, "hartree", "cm") == pytest.approx(219474.63136320, rel=1e-12)


def test_derived_conversions():
    # 1 eV = 96.48533212 kJ/mol = 8065.543937 cm⁻¹; 1 cm⁻¹ = 0.01196265656 kJ/mol (CODATA 2018)
    assert units.convert_energy(1.0, "ev", "kj") == pytest.approx(96.48533212, rel=1e-9)
    assert units.convert_energy(1.0, "ev", "cm") == pytest.approx(8065.543937, rel=1e-9)
    assert units.cm_to_kj_mol(1.0) == pytest.approx(0.01196265656, rel=1e-9)
    assert units.kj_mol_to_cm(units.cm_to_kj_mol(1234.5)) == pytest.approx(1234.5)
    assert units.bohr_to_angstrom(1.0) == pytest.approx(0.529177210903, rel=1e-12)


def test_unknown_unit_is_an_input_error():
    with pytest.raises(InputError, match="unknown energy unit 'furlong'"):
        units.convert_energy(1.0, "furlong", "kj")


def test_thermochemistry_constants_codata_2018():
    # R = k·N_A = 8.314 462 618... J/(mol K) exact in the 2019 SI; 1 Eh = 3.157 750 248 0407e5 K
    # (CODATA 2018: Tiesinga, Mohr, Newell, Taylor, Rev. Mod. Phys. 93, 025010, 2021).
    assert units.GAS_CONSTANT_J_PER_MOL_K == pytest.approx(8.314462618, rel=1e-10)
    assert units.HARTREE_KELVIN == pytest.approx(3.1577502480407e5, rel=1e-10)
    assert units.hartree_per_kelvin_to_j_mol_k(1.0 / units.HARTREE_KELVIN) == pytest.approx(8.314462618, rel=1e-9)


def test_hessian_eigenvalue_to_wavenumber():
    # 1 Eh/(bohr² amu) is 5140.487 cm⁻¹: √(Eh/(a0² u))/(2πc) from the CODATA 2018 values (a derivation).
    assert units.wavenumber_cm_from_eigenvalue(1.0) == pytest.approx(5140.487, rel=1e-6)
    assert units.wavenumber_cm_from_eigenvalue(-4.0) == pytest.approx(-2 * 5140.487, rel=1e-6)
