"""The ligand library: phosphines, chelates, formulas as chemists write them, cone and bite angles,
builds without clashes, held relaxations that keep the arrangement but not the bite."""

import numpy as np
import pytest

from fourfold.chem.complex import complex_from_formula
from fourfold.chem.ligands import bundled_ligands, custom_ligand
from fourfold.errors import InputError
from fourfold.field.ligand_library import hill_formula, ligand_entry, ligand_table
from fourfold.geometry.builder import build, build_all, build_path_point, clashes
from fourfold.geometry.cone import cone_angle_deg
from fourfold.geometry.isomers import isomers_of
from fourfold.geometry.shape import geometry_indices
from fourfold.report.text import ligands_text

MONODENTATE = ["PPh3", "PCy3", "PtBu3", "P(OMe)3", "PMe2Ph", "AsPh3", "NMe3", "MeCN", "CNMe", "OAc"]
CHELATES = ["en", "tmeda", "bipy", "phen", "acac", "dppe", "dppp", "dmpe", "ox", "dmg"]


def _angle_deg(a, b):
    return float(np.degrees(np.arccos(np.clip(a @ b / np.linalg.norm(a) / np.linalg.norm(b), -1, 1))))


def test_library_has_the_ligands_chemists_use():
    ligands = bundled_ligands()
    assert set(MONODENTATE + CHELATES) <= set(ligands)
    for name in CHELATES:
        assert ligands[name].denticity == 2
    # charges: acetate, acetylacetonate, dimethylglyoximate(1−), oxalate(2−) [common practice, no source]
    assert {n: ligands[n].charge for n in ("OAc", "acac", "dmg", "ox", "en", "dppe")} == {
        "OAc": -1, "acac": -1, "dmg": -1, "ox": -2, "en": 0, "dppe": 0}
    assert ligands["CNMe"].donor == "C" and ligands["MeCN"].donor == "N" and ligands["dppe"].donors == ("P", "P")
    # Jørgensen 1971, pp. 347–348 (docs/sources.md#jorgensen1971-ligand-field): f(en) 1.28, f(bipy) 1.33
    assert ligands["en"].f.value == 1.28 and ligands["bipy"].f.value == 1.33
    for name in MONODENTATE + CHELATES:
        assert "GFN2-xTB" in ligands[name].geometry_source


@pytest.mark.parametrize("name,formula", [
    # molecular formulas of the free ligands (anions as bound) [common practice, no source]
    ("PPh3", "C18H15P"), ("PCy3", "C18H33P"), ("PtBu3", "C12H27P"), ("P(OMe)3", "C3H9O3P"), ("PMe2Ph", "C8H11P"),
    ("AsPh3", "C18H15As"), ("NMe3", "C3H9N"), ("MeCN", "C2H3N"), ("CNMe", "C2H3N"), ("OAc", "C2H3O2"),
    ("en", "C2H8N2"), ("tmeda", "C6H16N2"), ("bipy", "C10H8N2"), ("phen", "C12H8N2"), ("acac", "C5H7O2"),
    ("dppe", "C26H24P2"), ("dppp", "C27H26P2"), ("dmpe", "C6H16P2"), ("ox", "C2O4"), ("dmg", "C4H7N2O2"),
])
def test_fragments_have_the_right_atoms(name, formula):
    assert hill_formula(bundled_ligands()[name].symbols) == formula


@pytest.mark.parametrize("formula,metal,ox,d", [
    # oxidation states and d counts of the textbook complexes [common practice, no source]
    ("[NiCl2(PPh3)2]", "Ni", 2, 8), ("[Ni(dppe)Cl2]", "Ni", 2, 8), ("[Cu(acac)2]", "Cu", 2, 9),
    ("[Ni(en)2]2+", "Ni", 2, 8), ("[Ni(dmg)2]", "Ni", 2, 8), ("[Ni(dmgH)2]", "Ni", 2, 8), ("[Pd(bipy)Cl2]", "Pd", 2, 8),
    ("[NiCl2(P(t-Bu)3)2]", "Ni", 2, 8), ("[NiCl2(P(tBu)3)2]", "Ni", 2, 8), ("[NiCl2(PtBu3)2]", "Ni", 2, 8),
    ("[Pt(ox)2]2-", "Pt", 2, 8), ("[Ni(CO)2(P(OMe)3)2]", "Ni", 0, 10), ("[Cu(MeCN)4]+", "Cu", 1, 10),
    ("[Zn(OAc)2(NMe3)2]", "Zn", 2, 10),
])
def test_formulas_as_chemists_write_them(formula, metal, ox, d):
    cx = complex_from_formula(formula)
    assert (cx.metal.symbol, cx.oxidation_state, cx.d_electrons) == (metal, ox, d)
    assert sum(lig.denticity for lig in cx.ligands) == 4


@pytest.mark.parametrize("formula,fragment", [
    ("[Ni(en)3]2+", "3 ligands with 6 donor atoms"),
    ("[Ni(dppe)Cl3]-", "4 ligands with 5 donor atoms"),
    ("[NiCl2(PPH3)2]", "closest: PPh3"),
    ("[Ni(dppb)Cl2]", "closest: dppp, dppe"),
    ("[NiCl2(P(t-Bu)3)2", "malformed"),
])
def test_bad_chelate_formulas_say_what_to_fix(formula, fragment):
    with pytest.raises(InputError, match=fragment.replace("(", r"\(").replace(")", r"\)")):
        complex_from_formula(formula)


# Tolman, Chem. Rev. 1977, 77, 313 (from memory): PMe3 118°, PPh3 145°, PCy3 170°, P(t-Bu)3 182°; PH3 87°,
# PF3 104°. Tolerance ±20°: Tolman measured space-filling models with the substituents folded back as far
# as they go, here the cone is that of one relaxed GFN2-xTB conformer, which an aryl group's ortho
# hydrogens widen most (measured: PMe3 +0.5°, PCy3 +6°, PtBu3 +5°, PPh3 +18°); the order, which is what
# the estimate uses, must be Tolman's.
CONE_TOLERANCE_DEG = 20.0


@pytest.mark.parametrize("name", ["PH3", "PMe3", "PF3", "PPh3", "PCy3", "PtBu3"])
def test_cone_angles_near_tolman(name):
    ligand = bundled_ligands()[name]
    assert cone_angle_deg(ligand) == pytest.approx(ligand.published_cone_deg.value, abs=CONE_TOLERANCE_DEG)


def test_cone_angles_in_tolmans_order():
    ligands = bundled_ligands()
    order = ["PH3", "PMe3", "PPh3", "PCy3", "PtBu3"]  # Tolman 1977 (from memory): 87 < 118 < 145 < 170 < 182
    computed = [cone_angle_deg(ligands[name]) for name in order]
    assert computed == sorted(computed)


def test_cone_of_a_single_atom_is_its_sphere():
    # one Cl⁻ at 2.28 Å with the Bondi radius 1.75 Å (Bondi 1964, from memory): 2·asin(1.75/2.28)
    assert cone_angle_deg(bundled_ligands()["Cl"]) == pytest.approx(2 * np.degrees(np.arcsin(1.75 / 2.28)))


@pytest.mark.parametrize("name,distance,bite,source", [
    # published bite angles at the metal–donor distance of the same structure (from memory):
    ("dmg", 1.86, 82.0, "Godycki & Rundle, Acta Cryst. 1953, 6, 487: Ni(dmgH)2"),
    ("dppe", 2.23, 85.8, "Steffen & Palenik, Inorg. Chem. 1976, 15, 2432: PdCl2(dppe)"),
    ("acac", 1.91, 93.0, "Lebrun, Lyon & Kuska, J. Crystallogr. Spectrosc. Res. 1986, 16, 889: Cu(acac)2"),
    ("bipy", 2.03, 80.5, "common practice, no source: M(bipy) bites 78–82° at M–N 2.0–2.1 Å"),
    ("en", 2.03, 84.0, "common practice, no source: M(en) bites 82–86° at M–N 2.0–2.1 Å"),
])
def test_bite_angle_from_the_fragment(name, distance, bite, source):
    # ±7°: the fragments were relaxed at GFN2-xTB in [PdCl2(L)], not in these complexes, and a chelate's donor
    # separation changes by about 0.1 Å from metal to metal (acac: O···O 2.78 Å in Cu(acac)2 from the numbers
    # above, 2.91 Å in the fragment), which moves the bite by about 5° at these distances
    assert bundled_ligands()[name].bite_angle_deg(distance) == pytest.approx(bite, abs=7.0), source


def test_ligand_table_and_entry():
    rows = ligand_table()
    assert {row["name"] for row in rows} >= set(MONODENTATE + CHELATES)
    entry = ligand_entry("P(t-Bu)3")  # an alias finds the entry
    assert entry["name"] == "PtBu3" and entry["published_cone_angle_deg"]["value"] == 182
    assert entry["e_sigma_ni2_cm"]["source"] and entry["bite_angle_deg"] is None
    assert ligand_entry("dppe")["bite_angle_deg"] > 70
    text = ligands_text(rows)
    assert "PPh3" in text and "C18H15P" in text and "Tolman" in text
    with pytest.raises(InputError, match=r"unknown ligand 'PPH3' \(closest: PPh3"):
        ligand_entry("PPH3")


def test_chelate_isomers_exist_only_where_a_chelate_can_reach():
    # a two-donor chelate spans cis sites, never trans ones [common practice, no source]: one SP-4 and one T-4
    # isomer for M(AA)X2 and M(AA)2; the cis/trans pair for the MA2B2 phosphine complex
    for formula in ("[Ni(dppe)Cl2]", "[Ni(en)2]2+", "[Cu(acac)2]"):
        cx = complex_from_formula(formula)
        assert [i.label for i in isomers_of(cx, "SP-4")] == [""] and [i.label for i in isomers_of(cx, "T-4")] == [""]
    assert [i.label for i in isomers_of(complex_from_formula("[NiCl2(PPh3)2]"), "SP-4")] == ["cis", "trans"]


def _test_complex(name):
    ligand = bundled_ligands()[name]
    if ligand.is_chelate:
        return complex_from_formula(f"[Ni({name})Cl2]{'' if ligand.charge == 0 else f'{-ligand.charge}-'}")
    return complex_from_formula(f"[NiCl3({name})]{1 - ligand.charge}-")


@pytest.mark.parametrize("name", MONODENTATE + CHELATES)
def test_every_new_ligand_builds_without_clashes(name):
    # no two non-bonded atoms closer than 0.8 × the sum of covalent radii (Pyykkö & Atsumi 2009, from memory)
    cx = _test_complex(name)
    for atoms in build_all(cx, ("T-4", "SP-4")):
        assert clashes(atoms) == [], atoms.info["arrangement"]
        for first, second in atoms.info["chelate_pairs"]:
            positions = atoms.get_positions()
            bite = _angle_deg(positions[first] - positions[0], positions[second] - positions[0])
            ligand = bundled_ligands()[name]
            distance = np.linalg.norm(positions[first] - positions[0])
            assert bite == pytest.approx(ligand.bite_angle_deg(distance), abs=1e-6)  # the fragment's own bite


def test_chelates_cis_in_the_square_and_on_an_edge_of_the_tetrahedron():
    # SP-4: the other two donors trans to the chelate's, all in one plane (tau4 ≈ 0); T-4: the chelate's plane
    # perpendicular to the plane of the other two donors (the tetrahedron's opposite edges are perpendicular)
    cx = complex_from_formula("[Ni(dppe)Cl2]")
    square = build(cx, "SP-4")
    assert geometry_indices(square, [1, 2, 3, 4])["tau4"] < 0.1
    tetrahedron = build(cx, "T-4")
    p = tetrahedron.get_positions()
    normal_chelate = np.cross(p[1] - p[0], p[2] - p[0])
    normal_other = np.cross(p[3] - p[0], p[4] - p[0])
    assert _angle_deg(normal_chelate, normal_other) == pytest.approx(90.0, abs=1e-6)
    assert geometry_indices(tetrahedron, [1, 2, 3, 4])["tau4"] > 0.85


def test_well_known_phosphine_complex_builds_in_both_arrangements():
    cx = complex_from_formula("[NiCl2(PPh3)2]")
    for arrangement, isomer in (("T-4", None), ("SP-4", "trans")):
        assert clashes(build(cx, arrangement, isomer)) == []
    assert clashes(build_path_point(cx, 140.0, "trans")) == []


def test_custom_chelate_from_xyz():
    # ethylenediamine written by hand: donors at atoms 0 and 3 (0-based), backbone C1, C2
    xyz = "N 1.50 1.40 0.0\nC 2.90 0.75 0.35\nC 2.90 -0.75 -0.35\nN 1.50 -1.40 0.0"
    chelate = custom_ligand("myen", xyz, [0, 3], 0)
    assert chelate.denticity == 2 and chelate.donors == ("N", "N")
    assert chelate.positions_angstrom[2:, 0].min() > 0  # the backbone lies away from the metal (+x)
    cx = complex_from_formula("[Ni(myen)2]2+", {"myen": chelate})
    assert clashes(build(cx, "SP-4")) == []
    with pytest.raises(InputError, match="one donor index, or two different ones"):
        custom_ligand("bad", xyz, [0, 0], 0)
    with pytest.raises(InputError, match="side of its two donors"):
        custom_ligand("flat", "N 0 1 0\nN 0 -1 0\nC 0 0 0", [0, 1], 0)


CHELATE_RECIPE = """
level = "screen"
relaxations = ["held"]
[ligands.myen]
xyz = "N 1.50 1.40 0.0\\nC 2.90 0.75 0.35\\nC 2.90 -0.75 -0.35\\nN 1.50 -1.40 0.0"
donor_indices = [0, 3]
charge = 0
f = 1.3
[[complex]]
formula = "[Ni(myen)Cl2]"
"""


def test_custom_chelate_through_a_recipe_reaches_the_worker():
    from fourfold.compute.tasks import complex_from_spec, start_structure
    from fourfold.study.jobs import expand
    from fourfold.study.recipe import parse_recipe

    study = parse_recipe(CHELATE_RECIPE)
    jobs = expand(study)
    assert {(j.spec.arrangement, j.spec.isomer) for j in jobs} == {("T-4", ""), ("SP-4", "")}
    cx = complex_from_spec(jobs[0].spec)
    assert cx.ligands[0].denticity == 2 and cx.ligands[0].f.value == 1.3
    _, atoms = start_structure(jobs[0].spec, None)
    assert atoms.info["chelate_pairs"] and clashes(atoms) == []
    with pytest.raises(InputError, match="not both"):
        parse_recipe(CHELATE_RECIPE.replace("donor_indices = [0, 3]", "donor_indices = [0, 3]\ndonor_index = 0"))
    with pytest.raises(InputError, match="two 0-based atom indices"):
        parse_recipe(CHELATE_RECIPE.replace("donor_indices = [0, 3]", "donor_indices = [0]"))


@pytest.mark.slow
@pytest.mark.parametrize("name", MONODENTATE + CHELATES)
def test_every_new_ligand_relaxes_at_screen_level(name):
    # One held GFN2-xTB relaxation per ligand of its Ni(II) complex, planar singlet (the screen level's
    # engine, through fourfold.compute.relax): it converges, stays planar (tau4 below 0.15; Yang, Powell &
    # Houser, Dalton Trans. 2007, 955) and keeps the ligand's bonds (bond lengths within 20 % of the fragment's).
    from fourfold.compute.relax import relax
    from fourfold.compute.xtb_engine import XtbPotential

    cx = _test_complex(name)
    start = build(cx, "SP-4")
    potential = XtbPotential(start.get_chemical_symbols(), charge=cx.charge, spin2s=0)
    result = relax(start, potential, "held", "SP-4", max_steps=200)
    assert result.converged, result.message
    assert geometry_indices(result.atoms, [1, 2, 3, 4])["tau4"] < 0.15
    fragment = start.arrays["fragment"]
    ligand_index = next(i for i, lig in enumerate(cx.ligands) if lig.name == name)
    atoms = np.flatnonzero(fragment == ligand_index)
    before = start.get_all_distances()[np.ix_(atoms, atoms)]
    after = result.atoms.get_all_distances()[np.ix_(atoms, atoms)]
    bonded = (before > 0) & (before < 1.8)
    assert np.all(np.abs(after[bonded] / before[bonded] - 1) < 0.2)
