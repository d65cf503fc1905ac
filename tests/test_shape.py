"""tau4, tau4' and continuous shape measures against their published definitions and values."""

import itertools
import math

import numpy as np
import pytest
from ase import Atoms
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import minimize
from scipy.spatial.transform import Rotation

from fourfold.errors import InputError
from fourfold.geometry.polyhedra import ARRANGEMENTS, d2d_path, unit_vectors
from fourfold.geometry.shape import (
    cshm,
    geometry_indices,
    ligand_angles_deg,
    nearest_shape,
    shape_measures,
    tau4,
    tau4_prime,
)

ORIGIN = np.zeros(3)
# θ = arccos(−1/3): Yang, Powell, Houser, Dalton Trans. 2007 [V]
THETA_DEG = 109.4712206
PROPERTY = settings(max_examples=40, deadline=None)


def donors_with_two_largest(beta_deg, alpha_deg):
    """Donors whose two largest angles are β (ligands 0/2) and α (ligands 1/3), β ≥ α ≥ θ.

    Pair 0/2 in the xz plane about +z, pair 1/3 in the yz plane about −z; the four mixed angles are
    arccos(−cos(β/2) cos(α/2)) ≤ θ, so β and α are the two largest. Derivation [C].
    """
    a, b = math.radians(beta_deg / 2), math.radians(alpha_deg / 2)
    return np.array(
        [
            [math.sin(a), 0, math.cos(a)],
            [0, math.sin(b), -math.cos(b)],
            [-math.sin(a), 0, math.cos(a)],
            [0, -math.sin(b), -math.cos(b)],
        ]
    )


def centred(arrangement):
    return np.vstack([ORIGIN, unit_vectors(arrangement)])


def sf4_seesaw():
    # equatorially vacant trigonal bipyramid: axial pair on ±z, two equatorial at 120° [C]
    return np.array([[0, 0, 1], [0, 0, -1], [1, 0, 0], [-0.5, math.sqrt(3) / 2, 0]])


def random_rotation(rng):
    return Rotation.from_quat(rng.normal(size=4))


# ---------------------------------------------------------------- angles


def test_ligand_angles_in_pair_order():
    # mixed angles arccos(−cos(β/2)cos(α/2)) of the construction above [C]
    beta, alpha = 160.0, 130.0
    mixed = math.degrees(math.acos(-math.cos(math.radians(beta / 2)) * math.cos(math.radians(alpha / 2))))
    angles = ligand_angles_deg(ORIGIN, donors_with_two_largest(beta, alpha))
    # pairs (0,1), (0,2), (0,3), (1,2), (1,3), (2,3)
    np.testing.assert_allclose(angles, [mixed, beta, mixed, mixed, alpha, mixed], atol=1e-10)


def test_ligand_angle_keeps_precision_near_linear():
    # [C] an angle 1e-6° short of linear, built from its own sine and cosine
    angle_rad = math.radians(180.0 - 1e-6)
    donors = np.array([[1, 0, 0], [math.cos(angle_rad), math.sin(angle_rad), 0], [0, 0, 1], [0, 0, -1]])
    assert ligand_angles_deg(ORIGIN, donors)[0] == pytest.approx(180.0 - 1e-6, abs=1e-10)


# ---------------------------------------------------------------- tau4, tau4'

IDEAL_TAU = [
    # (donors, tau4, tau4'): ideal shapes [C] (computed from the published formulas, Yang 2007; Okuniewski 2015)
    ("T-4", 1.0000, 1.0000),
    ("SP-4", 0.0000, 0.0000),
    ("trigonal-pyramid", 0.8507, 0.8507),
    ("SS-4", 0.6380, 0.3592),
]


@pytest.mark.parametrize("arrangement, expected_tau4, expected_tau4_prime", IDEAL_TAU)
def test_tau4_of_ideal_shapes(arrangement, expected_tau4, expected_tau4_prime):
    # [C] computed from the published formulas (Yang, Powell, Houser, Dalton Trans. 2007;
    # Okuniewski et al., Polyhedron 2015)
    donors = unit_vectors(arrangement)
    assert tau4(ORIGIN, donors) == pytest.approx(expected_tau4, abs=5e-5)
    assert tau4_prime(ORIGIN, donors) == pytest.approx(expected_tau4_prime, abs=5e-5)


def test_tau4_of_sf4_like_seesaw():
    # [C] from the formulas: equatorially vacant TBP (180°, 120°) gives τ4 0.4254, τ4′ 0.2395 —
    # a different seesaw from our SS-4 (0.6380), which pins down which seesaw SS-4 means
    assert tau4(ORIGIN, sf4_seesaw()) == pytest.approx(0.4254, abs=5e-5)
    assert tau4_prime(ORIGIN, sf4_seesaw()) == pytest.approx(0.2395, abs=5e-5)


@pytest.mark.parametrize("arrangement, headline", [("T-4", 1.00), ("SP-4", 0.00), ("trigonal-pyramid", 0.85)])
def test_tau4_headline_values(arrangement, headline):
    # Yang, Powell, Houser, Dalton Trans. 2007: τ4 = 1.00 Td, 0.00 SP, ≈0.85 trigonal pyramidal [M]
    assert tau4(ORIGIN, unit_vectors(arrangement)) == pytest.approx(headline, abs=0.01)


def random_angle_pairs(count, seed):
    rng = np.random.default_rng(seed)
    pairs = np.sort(rng.uniform(THETA_DEG, 180.0, size=(count, 2)), axis=1)
    return [(float(beta), float(alpha)) for alpha, beta in pairs]


@pytest.mark.parametrize("beta, alpha", random_angle_pairs(12, seed=4))
def test_tau4_linear_forms(beta, alpha):
    donors = 2.2 * donors_with_two_largest(beta, alpha)
    # Yang, Powell, Houser, Dalton Trans. 2007: τ4 ≈ −0.00709α − 0.00709β + 2.55 [V]
    assert tau4(ORIGIN, donors) == pytest.approx(-0.00709 * alpha - 0.00709 * beta + 2.55, abs=0.01)
    # Okuniewski et al., Polyhedron 2015: τ4′ ≈ −0.00399α − 0.01019β + 2.55 [V]
    assert tau4_prime(ORIGIN, donors) == pytest.approx(-0.00399 * alpha - 0.01019 * beta + 2.55, abs=0.01)
    # exact coefficients, computed from the formulas [C]
    exact_tau4 = 2.5521496561 - 0.0070893046 * (alpha + beta)
    exact_tau4_prime = 180 / (180 - THETA_DEG) - 0.0039915574 * alpha - 0.0101870518 * beta
    assert tau4(ORIGIN, donors) == pytest.approx(exact_tau4, abs=1e-8)
    assert tau4_prime(ORIGIN, donors) == pytest.approx(exact_tau4_prime, abs=1e-8)


@pytest.mark.parametrize("trans_deg", [THETA_DEG, 115.0, 120.0, 135.0, 150.0, 165.0, 180.0])
def test_tau4_along_d2d_path(trans_deg):
    # [C]: on the D2d path α = β = 2φ, so τ4 = τ4′ = (360 − 4φ)/(360 − 2θ)
    # (140.53, as some tables print the denominator, is a slip: 360 − 2θ = 141.058, which τ4 0.851 at 120° needs)
    donors = d2d_path(trans_deg)
    expected = (360.0 - 2 * trans_deg) / (360.0 - 2 * THETA_DEG)
    assert tau4(ORIGIN, donors) == pytest.approx(expected, abs=1e-7)
    assert tau4_prime(ORIGIN, donors) == pytest.approx(tau4(ORIGIN, donors), abs=1e-12)


@PROPERTY
@given(seed=st.integers(0, 2**32 - 1))
def test_tau4_prime_never_exceeds_tau4(seed):
    # τ4′ ≤ τ4 always, Okuniewski et al., Polyhedron 2015 [V]
    rng = np.random.default_rng(seed)
    donors = rng.normal(size=(4, 3))
    assert tau4_prime(ORIGIN, donors) <= tau4(ORIGIN, donors) + 1e-12


# ---------------------------------------------------------------- CShM between ideal shapes

CENTRED_MATRIX = {
    # CShM between ideal shapes, metal included, from the definition of Pinsky & Avnir 1998 [C]
    ("T-4", "SP-4"): 33.333, ("T-4", "SS-4"): 9.790, ("T-4", "trigonal-pyramid"): 3.573,
    ("SP-4", "SS-4"): 19.050, ("SP-4", "trigonal-pyramid"): 34.875, ("SS-4", "trigonal-pyramid"): 8.233,
}
LIGANDS_ONLY = {
    # the same, ligands only [C]
    ("T-4", "SP-4"): 33.333, ("T-4", "trigonal-pyramid"): 2.288, ("T-4", "SS-4"): 7.213,
    ("SP-4", "SS-4"): 16.737, ("SP-4", "trigonal-pyramid"): 34.007,
}


@pytest.mark.parametrize("structure, reference", list(itertools.product(ARRANGEMENTS, repeat=2)))
def test_centred_cshm_matrix(structure, reference):
    # [C] CENTRED_MATRIX (rows Q, columns P, metal included); the table is symmetric, zero diagonal
    key = (structure, reference) if (structure, reference) in CENTRED_MATRIX else (reference, structure)
    expected = 0.0 if structure == reference else CENTRED_MATRIX[key]
    assert cshm(centred(structure), centred(reference)) == pytest.approx(expected, abs=5e-4)
    assert shape_measures(ORIGIN, unit_vectors(structure))[reference] == pytest.approx(expected, abs=5e-4)


@pytest.mark.parametrize("pair, expected", list(LIGANDS_ONLY.items()))
def test_ligand_only_cshm(pair, expected):
    # [C] LIGANDS_ONLY, in both directions
    a, b = pair
    assert cshm(unit_vectors(a), unit_vectors(b)) == pytest.approx(expected, abs=5e-4)
    assert cshm(unit_vectors(b), unit_vectors(a)) == pytest.approx(expected, abs=5e-4)


def test_td_to_sp_published_value():
    # Td↔SP ≈ 33.33, Keinan & Avnir, Inorg. Chem. 2001 / Alvarez group [M]
    assert cshm(centred("T-4"), centred("SP-4")) == pytest.approx(33.33, abs=0.01)


# ---------------------------------------------------------------- D2d path


@pytest.mark.parametrize("trans_deg", [112.0, 120.0, 130.0, 140.0, 150.0, 160.0, 175.0])
def test_d2d_path_shape_measures(trans_deg):
    # [C] from the CShM definition: S(SP-4) = 100 cos²φ and S(T-4) = 100 sin²(φ − 54.7356°), metal included
    phi_deg = trans_deg / 2
    measures = shape_measures(ORIGIN, d2d_path(trans_deg))
    assert measures["SP-4"] == pytest.approx(100 * math.cos(math.radians(phi_deg)) ** 2, abs=1e-3)
    assert measures["T-4"] == pytest.approx(100 * math.sin(math.radians(phi_deg - 54.7356)) ** 2, abs=1e-3)
    # minimal-distortion path: arcsin√(S_T/100) + arcsin√(S_SP/100) = arcsin√(33.33/100) = 35.264°,
    # Casanova, Cirera, Llunell, Alemany, Avnir, Alvarez, JACS 2004, 126, 1755 [M]
    path_deg = math.degrees(
        math.asin(math.sqrt(measures["T-4"] / 100)) + math.asin(math.sqrt(measures["SP-4"] / 100))
    )
    assert path_deg == pytest.approx(35.264, abs=1e-3)


@pytest.mark.parametrize(
    "trans_deg, expected_tau4, expected_t, expected_sp",
    # sample points [C]
    [(120.0, 0.851, 0.842, 25.000), (150.0, 0.425, 11.996, 6.699)],
)
def test_d2d_sample_points(trans_deg, expected_tau4, expected_t, expected_sp):
    donors = d2d_path(trans_deg)
    measures = shape_measures(ORIGIN, donors)
    assert tau4(ORIGIN, donors) == pytest.approx(expected_tau4, abs=5e-4)
    assert measures["T-4"] == pytest.approx(expected_t, abs=5e-4)
    assert measures["SP-4"] == pytest.approx(expected_sp, abs=5e-4)


# ---------------------------------------------------------------- invariance and bounds


def distorted(arrangement, rng, amount=0.15):
    return unit_vectors(arrangement) * rng.uniform(1.8, 2.4) + rng.normal(scale=amount, size=(4, 3))


@PROPERTY
@given(seed=st.integers(0, 2**32 - 1), arrangement=st.sampled_from(ARRANGEMENTS))
def test_indices_invariant_under_rigid_motion_scale_and_relabelling(seed, arrangement):
    # Pinsky & Avnir, Inorg. Chem. 1998 [M]: S is minimised over rotation, translation, scale and vertex
    # pairing, so none of them can change it; τ4 depends only on angles (Yang, Powell, Houser 2007)
    rng = np.random.default_rng(seed)
    donors = distorted(arrangement, rng)
    metal = rng.normal(size=3)
    before = shape_measures(metal, metal + donors)
    tau_before = (tau4(metal, metal + donors), tau4_prime(metal, metal + donors))

    scale = rng.uniform(0.3, 3.0)
    shift = rng.normal(scale=10.0, size=3)
    moved_donors = scale * random_rotation(rng).apply(donors)[rng.permutation(4)]
    moved_metal = shift
    after = shape_measures(moved_metal, moved_metal + moved_donors)
    for name in ARRANGEMENTS:
        assert after[name] == pytest.approx(before[name], abs=1e-8)
    assert tau4(moved_metal, moved_metal + moved_donors) == pytest.approx(tau_before[0], abs=1e-10)
    assert tau4_prime(moved_metal, moved_metal + moved_donors) == pytest.approx(tau_before[1], abs=1e-10)


@PROPERTY
@given(seed=st.integers(0, 2**32 - 1), arrangement=st.sampled_from(ARRANGEMENTS))
def test_mirror_image_has_same_measures_against_achiral_references(seed, arrangement):
    # [C] the four ideal shapes have mirror planes (point groups Td, D4h, C2v, C3v), so a
    # structure and its mirror image are equally far from each
    rng = np.random.default_rng(seed)
    donors = distorted(arrangement, rng)
    mirrored = donors * np.array([1.0, 1.0, -1.0])
    before, after = shape_measures(ORIGIN, donors), shape_measures(ORIGIN, mirrored)
    for name in ARRANGEMENTS:
        assert after[name] == pytest.approx(before[name], abs=1e-8)


@PROPERTY
@given(seed=st.integers(0, 2**32 - 1), n=st.integers(2, 6))
def test_cshm_of_random_shapes_lies_between_0_and_100(seed, n):
    # S = 0 for identical shapes, 100 at most: Pinsky & Avnir 1998 [M]
    rng = np.random.default_rng(seed)
    points, reference = rng.normal(size=(n, 3)), rng.normal(size=(n, 3))
    assert 0.0 <= cshm(points, reference) <= 100.0
    assert cshm(points, 2.0 * random_rotation(rng).apply(points) + 5.0) == pytest.approx(0.0, abs=1e-9)


def brute_force_cshm(points, reference, rng, starts=2):
    """S from a numerical minimisation over rotation vector, scale and translation, for each pairing."""
    q = points - points.mean(axis=0)
    norm2 = np.sum(q**2)

    def rotation_matrix(rotvec):
        # Rodrigues' formula: a rotation vector always gives a proper rotation
        angle = math.sqrt(rotvec @ rotvec) + 1e-300
        x, y, z = rotvec / angle
        k = np.array([[0.0, -z, y], [z, 0.0, -x], [-y, x, 0.0]])
        return np.eye(3) + math.sin(angle) * k + (1 - math.cos(angle)) * k @ k

    def residual(params, p):
        # exp keeps the scale positive: a negative scale is an inversion, an improper operation
        placed = np.exp(params[3]) * p @ rotation_matrix(params[:3]).T + params[4:]
        return np.sum((points - placed) ** 2)

    best = np.inf
    for perm in itertools.permutations(range(len(points))):
        p = reference[list(perm)]
        for _ in range(starts):
            start = np.concatenate([rng.normal(size=3), np.zeros(4)])
            best = min(best, minimize(residual, start, args=(p,), method="BFGS").fun)
    return 100.0 * best / norm2


def test_cshm_matches_brute_force_minimisation():
    # [C] the definition of Pinsky & Avnir 1998 minimised numerically, independent of
    # the closed forms for rotation and scale
    rng = np.random.default_rng(11)
    points, reference = rng.normal(size=(4, 3)), rng.normal(size=(4, 3))
    assert cshm(points, reference) == pytest.approx(brute_force_cshm(points, reference, rng), abs=1e-5)


def test_chiral_shape_is_not_matched_by_its_mirror_image():
    # proper rotations only (Pinsky & Avnir 1998 minimise over rotations [M]): an
    # irregular tetrahedron with six different edges cannot be turned into its mirror image; the value
    # is checked against the numerical minimisation over rotation vectors [C]
    rng = np.random.default_rng(5)
    points = rng.normal(size=(4, 3))
    mirror = points * np.array([-1.0, 1.0, 1.0])
    measured = cshm(points, mirror)
    assert measured > 0.1
    assert measured == pytest.approx(brute_force_cshm(points, mirror, rng), abs=1e-5)


# ---------------------------------------------------------------- on ase.Atoms


def test_geometry_indices_of_tetrahedral_nicl4():
    # [NiCl4]2-: Td, Ni–Cl ≈ 2.27 Å, Stucky, Folkers, Kistenmacher, Acta Cryst. 1967 [M];
    # S values from CENTRED_MATRIX [C]; metal deliberately not atom 0
    positions = np.vstack([2.27 * unit_vectors("T-4")[:2], ORIGIN, 2.27 * unit_vectors("T-4")[2:]])
    atoms = Atoms("Cl2NiCl2", positions=positions + [1.0, -2.0, 0.5])
    result = geometry_indices(atoms, [0, 1, 3, 4], metal_index=2)
    assert result["tau4"] == pytest.approx(1.0, abs=1e-9)
    assert result["tau4_prime"] == pytest.approx(1.0, abs=1e-9)
    assert result["nearest_shape"] == "T-4"
    assert result["nearest_shape_measure"] == pytest.approx(0.0, abs=1e-9)
    assert result["shape_measures"]["SP-4"] == pytest.approx(33.333, abs=5e-4)
    assert result["shape_measures"]["trigonal-pyramid"] == pytest.approx(3.573, abs=5e-4)


def test_geometry_indices_of_planar_nickel_cyanide():
    # [Ni(CN)4]2-: D4h, Ni–C 1.86 Å, C–N 1.15 Å, Musselman, Stecher, Watkins, Inorg. Chem. 1980 [V]
    axes = unit_vectors("SP-4")
    atoms = Atoms("NiC4N4", positions=np.vstack([ORIGIN, 1.86 * axes, (1.86 + 1.15) * axes]))
    result = geometry_indices(atoms, [1, 2, 3, 4])
    assert result["tau4"] == pytest.approx(0.0, abs=1e-9)
    assert result["nearest_shape"] == "SP-4"
    assert result["shape_measures"]["T-4"] == pytest.approx(33.333, abs=5e-4)
    # a donor on the wrong atom (N instead of C) breaks the equal-bond square
    assert geometry_indices(atoms, [1, 2, 3, 8])["shape_measures"]["SP-4"] > 0.1


def test_nearest_shape_of_flattened_tetrahedron():
    # [C] at trans 120° S_T = 0.842, far below the other references
    name, measure = nearest_shape(ORIGIN, 2.0 * d2d_path(120.0))
    assert name == "T-4"
    assert measure == pytest.approx(0.842, abs=5e-4)


# ---------------------------------------------------------------- error paths


@pytest.mark.parametrize(
    "metal, donors",
    [
        (ORIGIN, np.ones((3, 3))),
        (ORIGIN, np.ones((4, 2))),
        (ORIGIN, np.ones(12)),
        (np.zeros(2), unit_vectors("T-4")),
        (ORIGIN, [[0, 0, 1], [1, 0, 0], [0, 1, 0], [0, 0, float("nan")]]),
        (ORIGIN, [[0, 0, 1], [1, 0, 0], [0, 1, 0], [0, 0, 0]]),  # donor on the metal
        (ORIGIN, "tetrahedron"),
    ],
)
@pytest.mark.parametrize("function", [ligand_angles_deg, tau4, tau4_prime, shape_measures, nearest_shape])
def test_bad_positions_are_input_errors(function, metal, donors):
    # common practice, no source: malformed input is the user's to fix
    with pytest.raises(InputError):
        function(metal, donors)


@pytest.mark.parametrize(
    "points, reference",
    [
        (np.ones((4, 3)), np.ones((5, 3))),  # different vertex counts
        (np.ones(3), np.ones(3)),
        (np.zeros((4, 3)), unit_vectors("T-4")),  # all points coincide
        (unit_vectors("T-4"), np.ones((4, 3))),  # all reference points coincide
        (np.random.default_rng(0).normal(size=(9, 3)), np.random.default_rng(1).normal(size=(9, 3))),
    ],
)
def test_bad_cshm_input_is_an_input_error(points, reference):
    # common practice, no source
    with pytest.raises(InputError):
        cshm(points, reference)


@pytest.mark.parametrize(
    "donor_indices, metal_index",
    [([1, 2, 3], 0), ([1, 2, 3, 3], 0), ([1, 2, 3, 9], 0), ([0, 1, 2, 3], 0), ([1, 2, 3, 4], 7),
     ([1, 2, 3, 4.0], 0), ([1, 2, 3, 4], True), (5, 0), ([1, 2, 3, -1], 0)],
)
def test_bad_atom_indices_are_input_errors(donor_indices, metal_index):
    # common practice, no source
    atoms = Atoms("NiCl4", positions=np.vstack([ORIGIN, 2.27 * unit_vectors("T-4")]))
    with pytest.raises(InputError):
        geometry_indices(atoms, donor_indices, metal_index=metal_index)
