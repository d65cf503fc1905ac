"""Ideal four-coordinate polyhedra and the D2d path between T-4 and SP-4."""

import itertools
import math

import numpy as np
import pytest

from fourfold.errors import InputError
from fourfold.geometry.polyhedra import ARRANGEMENTS, d2d_path, unit_vectors

# θ = arccos(−1/3) = 109.4712206°: Yang, Powell, Houser, Dalton Trans. 2007 [V]
TETRAHEDRAL_DEG = 109.4712206


def pair_angles_deg(vectors):
    """Angle (degrees) for every donor pair (i, j), i < j, computed independently of fourfold."""
    return {
        (i, j): math.degrees(math.acos(np.clip(np.dot(vectors[i], vectors[j]), -1.0, 1.0)))
        for i, j in itertools.combinations(range(4), 2)
    }


def test_arrangement_symbols_are_iupac():
    # IUPAC, Nomenclature of Inorganic Chemistry (2005), Table IR-9.3 [V] for T-4, SP-4, SS-4;
    # trigonal-pyramid from Cirera, Alemany, Alvarez, Chem. Eur. J. 2004 [M]
    assert ARRANGEMENTS == ("T-4", "SP-4", "SS-4", "trigonal-pyramid")


@pytest.mark.parametrize("arrangement", ARRANGEMENTS)
def test_unit_vectors_have_unit_length(arrangement):
    # Unit vectors by definition of the ideal polyhedra with all M–L bonds equal (Cirera, Alemany, Alvarez 2004) [C]
    vectors = unit_vectors(arrangement)
    assert vectors.shape == (4, 3)
    np.testing.assert_allclose(np.linalg.norm(vectors, axis=1), 1.0, atol=1e-12)


def test_square_on_axes_with_trans_pairs_0_2_and_1_3():
    # SP-4 on +x, +y, −x, −y: the axis convention of the AOM tables (Schäffer & Jørgensen 1965) [C]
    np.testing.assert_allclose(
        unit_vectors("SP-4"), [[1, 0, 0], [0, 1, 0], [-1, 0, 0], [0, -1, 0]], atol=1e-15
    )
    angles = pair_angles_deg(unit_vectors("SP-4"))
    # square planar: trans 180°, cis 90° (IUPAC 2005, Table IR-9.3 [V])
    for pair, angle in angles.items():
        assert angle == pytest.approx(180.0 if pair in {(0, 2), (1, 3)} else 90.0, abs=1e-10)


def test_tetrahedron_has_all_angles_arccos_minus_third():
    # regular tetrahedron: every L–M–L angle θ = arccos(−1/3), Yang, Powell, Houser 2007 [V]
    for angle in pair_angles_deg(unit_vectors("T-4")).values():
        assert angle == pytest.approx(TETRAHEDRAL_DEG, abs=1e-6)


def test_seesaw_is_cis_divacant_octahedron():
    # SS-4 as the cis-divacant octahedron, angles (β, α) = (180°, 90°) [C], Alvarez's SS-4 (Cirera et al. 2004) [M]
    vectors = unit_vectors("SS-4")
    np.testing.assert_allclose(np.abs(vectors[[0, 2], 2]), 1.0, atol=1e-15)  # the trans pair on ±z
    angles = pair_angles_deg(vectors)
    assert angles[(0, 2)] == pytest.approx(180.0, abs=1e-10)
    for pair, angle in angles.items():
        if pair != (0, 2):
            assert angle == pytest.approx(90.0, abs=1e-10)


def test_trigonal_pyramid_is_axially_vacant_tbp():
    # trigonal-pyramid: one axial ligand at 90° to three equatorial ones at 120° (C3v), Cirera, Alemany, Alvarez 2004
    # [C]
    angles = pair_angles_deg(unit_vectors("trigonal-pyramid"))
    for (i, _), angle in angles.items():
        assert angle == pytest.approx(90.0 if i == 0 else 120.0, abs=1e-10)


def _turned_45_about_z(vectors):
    c = s = math.sqrt(0.5)
    return vectors @ np.array([[c, s, 0.0], [-s, c, 0.0], [0.0, 0.0, 1.0]])


def test_d2d_path_end_points_are_t4_and_sp4():
    # D2d flattening runs from Td (2φ = θ) to the square (2φ = 180°): docs/sources.md#casanova2004-paths [C];
    # T-4 itself sits in the cube frame (textbook e = z², x²−y²), i.e. the path's start turned 45° about z.
    np.testing.assert_allclose(_turned_45_about_z(d2d_path(TETRAHEDRAL_DEG)), unit_vectors("T-4"), atol=1e-8)
    np.testing.assert_allclose(d2d_path(180.0), unit_vectors("SP-4"), atol=1e-12)


def test_t4_is_on_alternate_cube_corners():
    # The tetrahedron inscribed in a cube, vertices (±1,±1,±1)/√3 with an even number of minus signs:
    # the frame of textbook crystal-field diagrams [common practice, no source]
    vectors = unit_vectors("T-4") * math.sqrt(3.0)
    np.testing.assert_allclose(np.abs(vectors), 1.0, atol=1e-12)
    assert np.all(np.prod(vectors, axis=1) > 0)


def test_t4_as_printed_to_four_decimals_is_on_the_path():
    # 109.4712° is how the T-4 angle is usually printed [common practice, no source]
    np.testing.assert_allclose(_turned_45_about_z(d2d_path(109.4712)), unit_vectors("T-4"), atol=1e-6)


@pytest.mark.parametrize("trans_deg", [115.0, 120.0, 135.0, 150.0, 170.0])
def test_d2d_path_angles(trans_deg):
    # D2d with half trans angle φ: trans pairs span 2φ, cis angles arccos(−cos²φ); derivation
    # from the vectors (±sinφ, 0, cosφ), (0, ±sinφ, −cosφ), docs/sources.md#casanova2004-paths [C]
    phi = math.radians(trans_deg / 2.0)
    cis_deg = math.degrees(math.acos(-math.cos(phi) ** 2))
    vectors = d2d_path(trans_deg)
    for pair, angle in pair_angles_deg(vectors).items():
        assert angle == pytest.approx(trans_deg if pair in {(0, 2), (1, 3)} else cis_deg, abs=1e-9)
    # the planes of the two trans pairs are perpendicular (D2d), docs/sources.md#casanova2004-paths [C]
    normal_a = np.cross(vectors[0], vectors[2])
    normal_b = np.cross(vectors[1], vectors[3])
    assert np.dot(normal_a, normal_b) == pytest.approx(0.0, abs=1e-12)


def test_unit_vectors_returns_a_copy():
    # common practice, no source: callers may scale the array in place without changing the ideal shape
    vectors = unit_vectors("T-4")
    vectors *= 2.0
    np.testing.assert_allclose(np.linalg.norm(unit_vectors("T-4"), axis=1), 1.0)


@pytest.mark.parametrize("name", ["Td", "sp-4", "", None, ["T-4"]])
def test_unknown_arrangement_names_the_valid_ones(name):
    # common practice, no source: an InputError says what to type instead
    with pytest.raises(InputError) as caught:
        unit_vectors(name)
    for valid in ARRANGEMENTS:
        assert valid in str(caught.value)


@pytest.mark.parametrize("trans_deg", [100.0, 109.0, 180.5, 270.0, float("nan"), "wide", None])
def test_d2d_path_rejects_angles_off_the_path(trans_deg):
    # the D2d flattening path spans θ..180° (θ: Yang, Powell, Houser 2007 [V]; docs/sources.md#casanova2004-paths)
    with pytest.raises(InputError):
        d2d_path(trans_deg)
