"""Ideal structures: placement, distances, clashes, isomers, path points."""

import numpy as np
import pytest

from fourfold.chem.complex import complex_from_formula
from fourfold.errors import InputError
from fourfold.geometry.builder import build, build_all, build_path_point, clashes
from fourfold.geometry.isomers import isomers
from fourfold.geometry.shape import geometry_indices, ligand_angles_deg

FORMULAS = ["[NiCl4]2-", "[Ni(CN)4]2-", "[PdCl4]2-", "[Cu(NH3)4]2+", "[NiCl2(PMe3)2]", "Ni(CO)4",
            "[Co(NCS)4]2-", "[Ni(py)4]2+", "[Ni(PMe3)4]2+", "[Ni(CH3)4]2-", "[Ni(H2O)4]2+", "[Ni(OH)4]2-",
            "[Ni(PF3)4]", "[NiH4]2-", "[Ni(PH3)4]2+", "[NiI4]2-", "[NiBr4]2-", "[NiF4]2-"]


@pytest.mark.parametrize("formula", FORMULAS)
def test_no_clashes_and_ideal_shapes(formula):
    # no two non-bonded atoms closer than 0.8 × the sum of covalent radii (Pyykkö & Atsumi 2009 radii,
    # from memory); the donor set is the ideal polyhedron: nearest shape S < 0.5 and tau4 of the ideal
    # shape (Yang, Powell, Houser, Dalton Trans. 2007)
    tau4_ideal = {"T-4": 1.0, "SP-4": 0.0, "SS-4": 0.638, "trigonal-pyramid": 0.851}
    cx = complex_from_formula(formula)
    for atoms in build_all(cx):
        assert clashes(atoms) == []
        indices = geometry_indices(atoms, atoms.info["donor_indices"])
        arrangement = atoms.info["arrangement"]
        assert indices["tau4"] == pytest.approx(tau4_ideal[arrangement], abs=1e-3)
        assert indices["shape_measures"][arrangement] < 0.5
        assert atoms.info["charge"] == cx.charge and atoms.info["formula"] == cx.formula
        assert sum(atoms.get_atomic_numbers()) - cx.charge > 0


def test_metal_at_origin_and_covalent_distances():
    # M–L start distance = r(M) + r(L), Pyykkö & Atsumi 2009 (from memory): Ni–Cl 1.10 + 0.99 Å
    atoms = build(complex_from_formula("[NiCl4]2-"), "T-4")
    assert atoms.get_chemical_symbols()[0] == "Ni"
    np.testing.assert_allclose(atoms.positions[0], 0.0)
    np.testing.assert_allclose(np.linalg.norm(atoms.positions[1:5], axis=1), 2.09)


def test_ligand_internal_geometry_is_kept():
    # CN⁻ stays linear along the M–C axis with C–N 1.16 Å [common practice, no source]
    atoms = build(complex_from_formula("[Ni(CN)4]2-"), "SP-4")
    carbon, nitrogen = atoms.positions[1], atoms.positions[5]
    assert np.linalg.norm(nitrogen - carbon) == pytest.approx(1.16)
    assert np.cross(carbon, nitrogen) == pytest.approx(np.zeros(3), abs=1e-9)


def test_cis_trans_isomers_of_ma2b2():
    # MA2B2 square planar has cis and trans isomers; tetrahedral has none (IUPAC 2005, IR-9.3; textbook fact)
    cx = complex_from_formula("[NiCl2(PMe3)2]")
    trans = build(cx, "SP-4", "trans")
    cis = build(cx, "SP-4", "cis")
    angle = {}
    for label, atoms in (("trans", trans), ("cis", cis)):
        order = atoms.info["ligand_order"]
        p_sites = [i for i, name in enumerate(order) if name == "PMe3"]
        angles = ligand_angles_deg(atoms.positions[0], atoms.positions[1:5])
        pairs = [(0, 1), (0, 2), (0, 3), (1, 2), (1, 3), (2, 3)]
        angle[label] = angles[pairs.index(tuple(p_sites))]
    assert angle["trans"] == pytest.approx(180.0) and angle["cis"] == pytest.approx(90.0)
    assert [i.label for i in isomers(("Cl", "Cl", "PMe3", "PMe3"), "T-4")] == [""]
    assert [i.label for i in isomers(("Cl", "Cl", "Cl", "PMe3"), "SP-4")] == [""]
    with pytest.raises(InputError, match="no SP-4 isomer 'fac'"):
        build(cx, "SP-4", "fac")


def test_path_point_trans_angle():
    # D2d path point: the two trans angles equal the requested angle (docs/sources.md#casanova2004-paths [C])
    atoms = build_path_point(complex_from_formula("[NiCl4]2-"), 140.0)
    angles = ligand_angles_deg(atoms.positions[0], atoms.positions[1:5])
    assert sorted(angles)[-2:] == pytest.approx([140.0, 140.0])
    assert atoms.info["trans_angle_deg"] == 140.0
