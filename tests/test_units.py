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
