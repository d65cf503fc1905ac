"""The AOM fit recovers known parameters from matrices built with the published AOM (Schäffer & Jørgensen 1965)."""

import numpy as np
import pytest

from fourfold.field.aom import aom_matrix
from fourfold.field.fit import CONDITION_LIMIT, RESIDUAL_LIMIT_FRACTION, fit_aom
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


def test_a_slightly_distorted_tetrahedron_is_fitted_with_pi_tied_not_blown_up():
    # a tetrahedron shows only Δt (Schäffer & Jørgensen 1965): 3 % distortion makes the full design formally of full
    # rank but ill-conditioned, and an unbounded full fit then returned e_σ of either sign in the 10⁴ cm⁻¹ range
    rng = np.random.default_rng(7)
    directions = unit_vectors("T-4") + 0.03 * rng.normal(size=(4, 3))
    matrix = aom_matrix(directions, 4000.0, 720.0) + 250.0 * rng.normal(size=(5, 5))
    matrix = (matrix + matrix.T) / 2
    fit = fit_aom(matrix, directions, ["Cl"] * 4, pi_ratios={"Cl": 0.18})
    assert fit.tied_pi and fit.condition_number <= CONDITION_LIMIT
    assert fit.withheld is None and 3000.0 < fit.e_sigma_cm["Cl"] < 5000.0


def test_fitted_e_sigma_is_never_negative_and_e_pi_keeps_the_ligands_sign():
    # σ donation raises the d levels: e_σ > 0 for every σ donor; π donors have e_π > 0, π acceptors e_π < 0
    # (Schäffer & Jørgensen 1965; Larsen & La Mar, J. Chem. Educ. 1974). Blocks the AOM cannot describe (random
    # symmetric matrices) must never give other signs.
    rng = np.random.default_rng(11)
    ratios = {"Cl": 0.18, "P": -0.05}
    for arrangement, names in (("SP-4", ["Cl", "P", "Cl", "P"]), ("SP-4", ["Cl", "Cl", "P", "P"]),
                               ("T-4", ["Cl", "Cl", "P", "P"]), ("T-4", ["Cl"] * 4)):
        for _ in range(10):
            block = rng.normal(scale=5000.0, size=(5, 5))
            fit = fit_aom((block + block.T) / 2, unit_vectors(arrangement), names, pi_ratios=ratios)
            assert all(v >= 0.0 for v in fit.e_sigma_cm.values())
            assert all(np.sign(v) in (0.0, np.sign(ratios[k])) for k, v in fit.e_pi_cm.items())
            assert fit.withheld or fit.rms_cm <= RESIDUAL_LIMIT_FRACTION * 50000


def test_a_block_that_wants_a_negative_e_sigma_is_withheld_with_the_reason():
    # a planar block whose trans-Cl σ parameter is negative: the bound holds e_σ(Cl) at zero, which leaves a σ
    # donor without σ bonding, so nothing is reported and the reason says so
    directions = unit_vectors("SP-4")
    matrix = aom_matrix(directions, [-3000.0, 9000.0, -3000.0, 9000.0], [800.0, -300.0, 800.0, -300.0])
    fit = fit_aom(matrix, directions, ["Cl", "P", "Cl", "P"], pi_ratios={"Cl": 0.18, "P": -0.05})
    assert "e_σ(Cl)" in fit.at_bound and not fit.e_sigma_cm
    assert "e_σ(Cl) held at 0 by the bound" in fit.withheld
    # far from the AOM form: the residual says so too
    matrix = aom_matrix(directions, [-9000.0, 6000.0, -9000.0, 6000.0], [800.0, -300.0, 800.0, -300.0])
    fit = fit_aom(matrix, directions, ["Cl", "P", "Cl", "P"], pi_ratios={"Cl": 0.18, "P": -0.05})
    assert fit.withheld.startswith("poor fit") and fit.rms_cm > RESIDUAL_LIMIT_FRACTION * np.ptp(
        np.linalg.eigvalsh(matrix))


def test_a_pi_interaction_stronger_than_the_sigma_one_is_withheld():
    # the π overlap of a donor is smaller than its σ overlap, so |e_π| < e_σ (Schäffer & Jørgensen 1965)
    directions = unit_vectors("SP-4")
    matrix = aom_matrix(directions, [5000.0, 3000.0, 5000.0, 3000.0], [800.0, -9000.0, 800.0, -9000.0])
    fit = fit_aom(matrix, directions, ["Cl", "P", "Cl", "P"], pi_ratios={"Cl": 0.18, "P": -0.05})
    assert fit.withheld == "|e_π| > e_σ for P" and fit.rms_cm == pytest.approx(0.0, abs=1e-6)


def test_ligands_the_block_cannot_separate_are_not_fitted():
    # d functions are even under inversion, so a ligand at −n adds the same AOM matrix as one at +n (Schäffer &
    # Jørgensen 1965): four different ligands in a square give only two trans-pair sums, whatever is tied
    directions = unit_vectors("SP-4")
    names = ["Cl", "Br", "I", "P"]
    matrix = aom_matrix(directions, [5000.0, 4500.0, 4000.0, 7000.0], 0.0)
    fit = fit_aom(matrix, directions, names, pi_ratios={})
    assert fit.withheld and fit.withheld.startswith("ill-conditioned") and not fit.e_sigma_cm
    assert fit.condition_number > CONDITION_LIMIT and all(f"e_σ({n})" in fit.withheld for n in names)


def test_the_ligand_field_table_shows_fit_quality_and_withholds_with_the_reason():
    # fits as the pipeline stores them ([NiCl4]2-, B3LYP/def2-SVP held structures of the demo study): a closed-shell
    # SP-4 singlet fitted with e_π held at its bound, a T-4 triplet withheld, and one stored by the unbounded fit
    # of earlier versions (e_σ −8576 cm⁻¹), which the table must not show
    from fourfold.chem.complex import complex_from_formula
    from fourfold.field.estimate import estimate
    from fourfold.report.tables import ligand_field_table
    from fourfold.verdict.comparison import Comparison, ComplexComparison, StateRecord

    def record(arrangement, spin2s, energy, **fit):
        return StateRecord("[NiCl4]2-", arrangement, "", spin2s, "held", "done", energy_hartree=energy, converged=True,
                           **fit)

    records = [
        record("SP-4", 0, -10.0, fitted_e_sigma_cm={"Cl": 11744.0}, fitted_e_pi_cm={"Cl": 0.0}, fit_tied_pi=False,
               fit_rms_cm=1021.0, fit_condition_number=7.7, fit_at_bound=["e_π(Cl)"]),
        record("T-4", 2, -10.1, fitted_e_sigma_cm={}, fitted_e_pi_cm={}, fit_rms_cm=4208.0, fit_condition_number=4.6,
               fit_withheld="poor fit (rms residual 4208 cm⁻¹ > 10 % of the 35030 cm⁻¹ d-level spread)"),
    ]
    cx = complex_from_formula("[NiCl4]2-")
    comparison = Comparison("t", "quick", [ComplexComparison(cx.formula, cx.d_electrons, records, estimate(cx),
                                                             "quick")], [])
    rows = {r["state"]: r for r in ligand_field_table(comparison).rows}
    planar, tetrahedral = rows["SP-4, singlet"], rows["T-4, triplet"]
    assert planar["e_sigma_fitted_cm-1"] == 11744.0 and planar["fit_rms_cm-1"] == 1021.0
    assert planar["fit_condition_number"] == 7.7 and "e_π(Cl) held at 0 by the bound" in planar["fit_note"]
    assert tetrahedral["e_sigma_fitted_cm-1"] is None and tetrahedral["fit_note"].startswith("withheld: poor fit")
    records[0].fit_withheld = None
    records[0].fitted_e_sigma_cm, records[0].fit_condition_number = {"Cl": -8576.0}, None
    old = next(r for r in ligand_field_table(comparison).rows if r["state"] == "SP-4, singlet")
    assert old["e_sigma_fitted_cm-1"] is None and "negative e_σ (Cl)" in old["fit_note"]
