"""Rotational symmetry numbers from the structure's proper rotations."""

import numpy as np
import pytest
from ase import Atoms
from ase.build import molecule

from fourfold.chem.complex import complex_from_formula
from fourfold.geometry.builder import build, build_path_point
from fourfold.geometry.symmetry import is_linear, symmetry_number

# Symmetry numbers are the orders of the rotational subgroups: C2v 2, C3v 3, Td 12, D4h 8, D2d 4,
# D6h 12, C∞v 1, D∞h 2 (point-group facts; common practice, no source).


@pytest.mark.parametrize("name, sigma", [("H2O", 2), ("NH3", 3), ("CH4", 12), ("C6H6", 12), ("CO", 1),
                                         ("CO2", 2)])
def test_small_molecules(name, sigma):
    assert symmetry_number(molecule(name)) == sigma


@pytest.mark.parametrize("formula, arrangement, sigma", [("[NiCl4]2-", "T-4", 12), ("[PtCl4]2-", "SP-4", 8),
                                                         ("[Ni(CO)4]", "T-4", 12)])
def test_ideal_complexes(formula, arrangement, sigma):
    assert symmetry_number(build(complex_from_formula(formula), arrangement)) == sigma


def test_noise_below_tolerance_keeps_the_symmetry():
    atoms = build(complex_from_formula("[NiCl4]2-"), "T-4")
    atoms.positions += np.random.default_rng(1).uniform(-0.01, 0.01, atoms.positions.shape)
    assert symmetry_number(atoms) == 12


def test_flattened_tetrahedron_is_d2d():
    # A point of the T-4 -> SP-4 path (trans angle 130°) has D2d symmetry: σ = 4 (point-group fact).
    atoms = build_path_point(complex_from_formula("[NiCl4]2-"), 130.0)
    assert symmetry_number(atoms) == 4


def test_linear_and_atom():
    assert is_linear(molecule("CO2")) and not is_linear(molecule("H2O"))
    assert symmetry_number(Atoms("Ar", positions=[[0, 0, 0]])) == 1
