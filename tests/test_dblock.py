"""Computed ligand field: d levels projected from converged Kohn–Sham operators, checked against the
textbook splitting patterns (AOM: Schäffer & Jørgensen 1965; point charges: Day & Selbin 1962)."""

import numpy as np
import pytest
from ase import Atoms

from fourfold.compute import dblock
from fourfold.compute import pyscf_engine as engine
from fourfold.compute.levels import custom_level
from fourfold.errors import InputError
from fourfold.field.aom import D_ORBITALS

# A cheap GGA keeps the test file short; the splitting pattern is a symmetry fact, not a functional one.
PBE_SVP = custom_level({"name": "pbe-svp", "functional": "pbe", "basis": "def2-svp", "grid_level": 1,
                        "conv_tol": 1e-6})
E_SET = [D_ORBITALS.index("z2"), D_ORBITALS.index("x2-y2")]


def tetrahedral(metal, ligand, distance_angstrom) -> Atoms:
    cube = np.array([[1, 1, 1], [-1, -1, 1], [-1, 1, -1], [1, -1, -1]]) / np.sqrt(3)
    return Atoms(metal + ligand * 4, positions=np.vstack([[0, 0, 0], cube * distance_angstrom]))


def square(metal, ligand, distance_angstrom) -> Atoms:
    axes = np.array([[1, 0, 0], [0, 1, 0], [-1, 0, 0], [0, -1, 0]], float)
    return Atoms(metal + ligand * 4, positions=np.vstack([[0, 0, 0], axes * distance_angstrom]))


@pytest.fixture(scope="module")
def nicl4_tetrahedral_triplet():
    # Ni–Cl 2.27 Å: Stucky, Folkers, Kistenmacher, Acta Cryst. 1967, 23, 1064 (from memory)
    result = engine.run_scf(tetrahedral("Ni", "Cl", 2.27), -2, 2, PBE_SVP)
    assert result.converged
    return result


@pytest.fixture(scope="module")
def pdcl4_square_singlet():
    # Pd–Cl ≈ 2.31 Å in K2PdCl4: Mais, Owston, Wood, Acta Cryst. 1972, B28, 393 (from memory)
    # closed shell by construction (the singlet stability search is tested in test_pyscf_engine)
    result = engine.run_scf(square("Pd", "Cl", 2.31), -2, 0, PBE_SVP, form="restricted")
    assert result.converged
    return result


def test_tetrahedral_nickel_splits_two_below_three(nicl4_tetrahedral_triplet):
    # Td: e (z², x²−y²) below t2 (xy, xz, yz) — point-charge and AOM tables
    # (Day & Selbin 1962; Schäffer & Jørgensen 1965).
    levels = dblock.d_levels_from_result(nicl4_tetrahedral_triplet, metal_index=0)
    gaps = np.diff(levels.relative_cm)
    assert np.argmax(gaps) == 1                                  # the big gap sits between levels 2 and 3
    assert levels.characters[E_SET][:, :2].sum() > 1.8           # the lower pair is the e set
    assert set(levels.labels[:2]) == {"z2", "x2-y2"}
    # Δt of [NiCl4]2- from spectra is 3500–4100 cm⁻¹ (Lever 1984, from memory): the
    # computed e–t2 separation must be of that size (a factor of two either way).
    delta_t_cm = levels.relative_cm[2:].mean() - levels.relative_cm[:2].mean()
    assert 0.5 * 3500 < delta_t_cm < 2 * 4100
    # Ni(II) is d8; covalency adds a few tenths of an electron to the projected d population.
    assert 7.5 < levels.d_population < 9.5 and levels.shell == "3d" and levels.spin == "average"


def test_square_planar_palladium_has_x2_y2_on_top_with_the_largest_gap(pdcl4_square_singlet):
    # SP-4 with ligands on ±x, ±y: d(x²−y²) is the σ-antibonding level, far above the other four
    # (point-charge +12.28 Dq against ≤ +2.28 Dq: Day & Selbin 1962; AOM 3eσ, Schäffer & Jørgensen 1965).
    levels = dblock.d_levels_from_result(pdcl4_square_singlet, metal_index=0)
    gaps = np.diff(levels.relative_cm)
    assert levels.labels[-1] == "x2-y2"
    assert levels.characters[D_ORBITALS.index("x2-y2"), -1] > 0.95
    assert np.argmax(gaps) == 3 and gaps[3] > 3 * gaps[:3].max()
    assert levels.shell == "4d" and levels.spin == "restricted"  # valence 4d behind the def2 ECP


def test_matrix_is_traceless_and_diagonalises_to_the_levels(pdcl4_square_singlet):
    # Linear algebra of the returned matrix (common practice, no source): trace removed, same spectrum.
    levels = dblock.d_levels_from_result(pdcl4_square_singlet)
    assert np.trace(levels.matrix_cm) == pytest.approx(0.0, abs=1e-6)
    assert np.linalg.eigvalsh(levels.matrix_cm) == pytest.approx(levels.relative_cm, abs=1e-6)
    assert levels.characters.sum(axis=0) == pytest.approx(np.ones(5))


def test_d_functions_are_found_in_pyscf_order_behind_an_ecp():
    mol = engine.build_mole(square("Pd", "Cl", 2.31), -2, 0, "def2-svp")
    index, shell = dblock.metal_d_indices(mol, 0)
    labels = mol.ao_labels(fmt=False)
    assert shell == "4d"
    assert [labels[i][3] for i in index] == ["xy", "yz", "z^2", "xz", "x2-y2"]
    with pytest.raises(InputError, match="outside"):
        dblock.metal_d_indices(mol, 9)
    water = engine.build_mole(Atoms("OH2", positions=[[0, 0, 0], [0.76, 0.59, 0], [-0.76, 0.59, 0]]),
                              0, 0, "sto-3g", ecp=None)
    with pytest.raises(InputError, match="no d functions"):
        dblock.metal_d_indices(water, 0)  # STO-3G oxygen has s and p functions only


@pytest.mark.slow
def test_rotating_the_square_by_45_degrees_moves_the_top_level_to_xy():
    # Ligands on the diagonals of the xy plane: the σ-antibonding d function is then xy
    # (the same rotation that turns x²−y² into xy; common practice, no source).
    rotated = square("Pd", "Cl", 2.31)
    rotated.rotate(45, "z")
    result = engine.run_scf(rotated, -2, 0, PBE_SVP, form="restricted")
    levels = dblock.d_levels_from_result(result)
    assert levels.labels[-1] == "xy"
