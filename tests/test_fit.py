"""The AOM fit recovers known parameters from matrices built with the published AOM (Schäffer & Jørgensen 1965)."""

import numpy as np
import pytest

from fourfold.field.aom import aom_matrix
from fourfold.field.fit import fit_aom
from fourfold.geometry.polyhedra import unit_vectors


def test_fit_recovers_sp4_parameters_including_ds_mixing():
    # SP-4 levels are x²−y² 3e_σ, xy 4e_π, xz/yz 2e_π, z² e_σ − 4e_ds (Schäffer & Jørgensen 1965 [C]):
    # four distinct levels determine e_σ, e_π, e_ds and the zero
    directions = unit_vectors("SP-4") * 2.3
    matrix = aom_matrix(directions, 5500.0, 900.0, e_ds=1200.0) - 30000.0 * np.eye(5)
    fit = fit_aom(matrix, directions, ["Cl"] * 4)
    assert not fit.tied_pi
    assert fit.e_sigma_cm["Cl"] == pytest.approx(5500.0)
    assert fit.e_pi_cm["Cl"] == pytest.approx(900.0)
    assert fit.e_ds_cm == pytest.approx(1200.0)
    assert fit.rms_cm == pytest.approx(0.0, abs=1e-6)


def test_fit_in_t4_ties_pi_to_sigma():
    # Td shows only Δt = (4/9)(3e_σ − 4e_π) (Schäffer & Jørgensen 1965): e_π must be tied to e_σ
    directions = unit_vectors("T-4")
    matrix = aom_matrix(directions, 4000.0, 720.0) + 1234.0 * np.eye(5)
    fit = fit_aom(matrix, directions, ["Cl"] * 4, pi_ratios={"Cl": 0.18})
    assert fit.tied_pi
    assert fit.e_sigma_cm["Cl"] == pytest.approx(4000.0)
    assert fit.e_pi_cm["Cl"] == pytest.approx(720.0)


def test_fit_two_ligand_kinds_trans_planar():
    directions = unit_vectors("SP-4")
    names = ["Cl", "P", "Cl", "P"]
    e_sigma = np.array([5000.0, 7000.0, 5000.0, 7000.0])
    e_pi = np.array([800.0, -300.0, 800.0, -300.0])
    matrix = aom_matrix(directions, e_sigma, e_pi)
    fit = fit_aom(matrix, directions, names, pi_ratios={"Cl": 0.18, "P": -0.05})
    assert fit.rms_cm == pytest.approx(0.0, abs=1e-6)
    # the sum of σ strengths and π strengths is what the levels fix
    assert fit.e_sigma_cm["Cl"] + fit.e_sigma_cm["P"] == pytest.approx(12000.0, rel=1e-6)
