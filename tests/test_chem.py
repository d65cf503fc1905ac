"""Chemistry model: formulas, charge balance, d counts, allowed spins, data sources."""

import pytest

from fourfold.chem.complex import complex_explicit, complex_from_formula
from fourfold.chem.ligands import bundled_ligands, covalent_radius_angstrom, custom_ligand
from fourfold.chem.metals import all_metals, get_metal
from fourfold.errors import InputError

# d counts and oxidation states: d^n = group − oxidation state [common practice, no source];
# spin states of each as in docs/sources.md#four-coordinate-rules (Greenwood & Earnshaw 1997, from memory).
CASES = [
    ("[NiCl4]2-", "Ni", 2, 8, (0, 2)),
    ("[Ni(CN)4]2-", "Ni", 2, 8, (0, 2)),
    ("[PdCl4]2-", "Pd", 2, 8, (0, 2)),
    ("[Cu(NH3)4]2+", "Cu", 2, 9, (1,)),
    ("[NiCl2(PMe3)2]", "Ni", 2, 8, (0, 2)),
    ("Ni(CO)4", "Ni", 0, 10, (0,)),
    ("[Co(NCS)4]2-", "Co", 2, 7, (1, 3)),
    ("[MnCl4]2-", "Mn", 2, 5, (1, 3, 5)),
    ("[FeCl4]-", "Fe", 3, 5, (1, 3, 5)),
    ("[TiCl4]", "Ti", 4, 0, (0,)),
    ("[Co(CO)4]-", "Co", -1, 10, (0,)),
]


@pytest.mark.parametrize("formula,metal,ox,d,spins", CASES)
def test_formula_gives_oxidation_state_d_count_and_spins(formula, metal, ox, d, spins):
    cx = complex_from_formula(formula)
    assert cx.metal.symbol == metal
    assert cx.oxidation_state == ox
    assert cx.d_electrons == d
    assert cx.allowed_spin2s == spins


def test_canonical_formula_round_trips():
    for formula, *_ in CASES:
        cx = complex_from_formula(formula)
        again = complex_from_formula(cx.formula)
        assert again.formula == cx.formula and again.charge == cx.charge


def test_roman_numeral_and_explicit_form_agree():
    assert complex_from_formula("[Ni(II)Cl4]2-") == complex_from_formula("[NiCl4]2-")
    assert complex_explicit("Ni", 2, ["Cl"] * 4, charge=-2) == complex_from_formula("[NiCl4]2-")


@pytest.mark.parametrize("formula,fragment", [
    ("[XxCl4]2-", "unknown element 'Xx'"),
    ("[CCl4]", "not a transition metal"),
    ("[NiQ4]2-", "unknown ligand 'Q'"),
    ("[NiCl3]-", "3 ligands"),
    ("[NiCl5]3-", "5 ligands"),
    ("[NiCl4]3+", "oxidation state +7 is not known for Ni"),
    ("[Ni(II)Cl4]", "charge does not add up"),
    ("[NiCl4", "malformed formula"),
    ("NiCl42-", "brackets"),
    ("[Ni(CN4]2-", "malformed formula"),
    ("", "empty formula"),
    ("[Cl4]", "unknown ligand"),
])
def test_bad_formulas_say_what_to_fix(formula, fragment):
    with pytest.raises(InputError, match=fragment.replace("(", r"\(").replace("+", r"\+")):
        complex_from_formula(formula)


def test_explicit_charge_mismatch_names_the_numbers():
    with pytest.raises(InputError, match=r"Ni\(\+2\) \+ ligands \(-4\) = -2.*given is \+0"):
        complex_explicit("Ni", 2, ["Cl"] * 4, charge=0)


@pytest.mark.parametrize("spin2s,why", [(1, "wrong parity"), (4, "more unpaired"), (-2, "negative")])
def test_impossible_spins(spin2s, why):
    # d8 allows 0 or 2 unpaired electrons (at most min(n, 10 − n)) [common practice, no source]
    cx = complex_from_formula("[NiCl4]2-")
    with pytest.raises(InputError, match=why):
        cx.check_spin(spin2s)


def test_metal_coverage_and_radii_sources():
    metals = all_metals()
    # 3d Ti–Zn, 4d Zr–Cd, 5d Hf–Hg
    assert [m.symbol for m in metals.values() if m.row == "3d"] == ["Ti", "V", "Cr", "Mn", "Fe", "Co", "Ni", "Cu", "Zn"]
    assert len([m for m in metals.values() if m.row == "4d"]) == 9
    assert len([m for m in metals.values() if m.row == "5d"]) == 9
    # Pyykkö & Atsumi, Chem. Eur. J. 2009, 15, 186: Ni 110 pm, Pd 120 pm, Cl 99 pm (from memory)
    assert get_metal("Ni").radius_angstrom == pytest.approx(1.10)
    assert get_metal("Pd").radius_angstrom == pytest.approx(1.20)
    assert covalent_radius_angstrom("Cl") == pytest.approx(0.99)
    assert get_metal("Pd").needs_ecp and not get_metal("Ni").needs_ecp


def test_free_ion_racah_b_from_jolly():
    # W. L. Jolly, Modern Inorganic Chemistry, 1989, p. 411 [V]
    expected = {"Ti": 695, "V": 755, "Cr": 810, "Mn": 860, "Fe": 917, "Co": 971, "Ni": 1030}
    for symbol, b in expected.items():
        value = get_metal(symbol).racah_b(2)
        assert value.value == b and "Jolly" in value.source


def test_jorgensen_g_and_f():
    # Jørgensen, Modern Aspects of Ligand Field Theory, 1971, pp. 347–348 [V]
    assert get_metal("Ni").g(2).value == 8.7
    assert get_metal("Co").g(3).value == 18.2
    ligands = bundled_ligands()
    assert {name: ligands[name].f.value for name in ("Br", "Cl", "F", "H2O", "NH3", "CN")} == {
        "Br": 0.72, "Cl": 0.78, "F": 0.9, "H2O": 1.00, "NH3": 1.25, "CN": 1.7}


def test_sixteen_ligands_with_sources():
    ligands = bundled_ligands()
    required = {"F", "Cl", "Br", "I", "CN", "NCS", "OH", "CH3", "H", "CO", "NH3", "H2O", "PH3", "PMe3", "PF3", "py"}
    assert required <= set(ligands)
    for ligand in ligands.values():
        for value in (ligand.f, ligand.pi_ratio, ligand.h):
            assert value.source  # every number says where it came from
        assert ligand.geometry_source  # and so does every fragment
    assert ligands["CN"].donor == "C" and ligands["NCS"].donor == "N"
    assert ligands["CN"].pi_acceptor and not ligands["Cl"].pi_acceptor


def test_custom_ligand_from_xyz_usable_in_formula():
    # acetonitrile, N-bound; linear fragment given with the donor last to check reordering
    mecn = custom_ligand("MeCN", "3\nacetonitrile\nC 0 0 2.6\nC 0 0 1.14\nN 0 0 0\n", donor_index=2, charge=0, f=1.2)
    cx = complex_from_formula("[Ni(MeCN)4]2+", {"MeCN": mecn})
    assert cx.oxidation_state == 2 and cx.ligands[0].donor == "N"
    assert mecn.positions_angstrom[1:, 2].min() > 0  # fragment points away from the metal
    with pytest.raises(InputError, match="donor_index"):
        custom_ligand("bad", "N 0 0 0", donor_index=3, charge=0)
    with pytest.raises(InputError, match="XYZ line"):
        custom_ligand("bad", "N 0 0", donor_index=0, charge=0)


@pytest.mark.parametrize("formula, says", [
    ("[NiCl4]-2", "written sign first: write the number, then the sign, e.g. [NiCl4]2-"),
    ("[NiCl4]2", "has no sign: write [NiCl4]2- or [NiCl4]2+"),
    ("[NiFoo4]2-", "unknown ligand 'Foo'"),
])
def test_formula_errors_point_at_the_mistake(formula, says):
    # charges are written number-then-sign after the bracket (IUPAC Red Book 2005, IR-4.4, from memory)
    with pytest.raises(InputError) as caught:
        complex_from_formula(formula)
    assert says in str(caught.value) and "\n" not in str(caught.value)
