"""Harmonic frequencies: finite-difference and analytic Hessians, normal modes, the minimum check."""

import numpy as np
import pytest
from ase import Atoms
from ase.build import molecule
from scipy.optimize import minimize

from fourfold.chem.complex import complex_from_formula
from fourfold.compute.hessian import (
    STEP_ANGSTROM,
    displace_along,
    displacements,
    harmonic_analysis,
    hessian_from_gradients,
    imaginary_modes,
    xtb_hessian,
)
from fourfold.compute.levels import Level
from fourfold.compute.pyscf_engine import PyscfPotential, energy_gradient, energy_hessian
from fourfold.compute.relax import relax
from fourfold.compute.xtb_engine import XtbPotential
from fourfold.errors import InputError
from fourfold.geometry.builder import build
from fourfold.units import BOHR_ANGSTROM


def relaxed(atoms, potential):
    """``atoms`` at the minimum of ``potential`` (BFGS on Cartesian gradients; small molecules only)."""
    def energy_and_gradient(flat):
        energy, gradient = potential(flat.reshape(-1, 3))
        return energy, gradient.ravel() / BOHR_ANGSTROM

    found = minimize(energy_and_gradient, atoms.get_positions().ravel(), jac=True, method="BFGS",
                     options={"gtol": 1e-6})
    moved = atoms.copy()
    moved.positions = found.x.reshape(-1, 3)
    return moved


def water_xtb():
    atoms = molecule("H2O")
    return relaxed(atoms, XtbPotential(atoms.get_chemical_symbols(), 0, 0, accuracy=0.01))


def test_gfn2_water_frequencies_near_experiment():
    # Experimental fundamentals of H2O: 1595 (bend), 3657 (symmetric), 3756 (antisymmetric stretch) cm⁻¹
    # (NIST CCCBDB, after Shimanouchi, Tables of Molecular Vibrational Frequencies, NSRDS-NBS 39, 1972).
    # GFN2-xTB (Bannwarth, Ehlert, Grimme, J. Chem. Theory Comput. 2019, 15, 1652) was fitted to give usable
    # frequencies; within 5 % of each fundamental is our tolerance, not a published figure.
    frequencies = harmonic_analysis(water_xtb(), xtb_hessian(water_xtb(), 0, 0)).frequencies_cm
    assert frequencies.shape == (3,)
    np.testing.assert_allclose(frequencies, [1595, 3657, 3756], rtol=0.05)


def test_frequencies_do_not_depend_on_position_or_orientation():
    # A rigid motion of the molecule leaves its frequencies unchanged (Eckart projection; common practice,
    # no source), up to the finite differences' own error, which depends on the axes (0.1 cm⁻¹ here).
    # Halving the step moves them by under 1 cm⁻¹.
    atoms = water_xtb()
    reference = harmonic_analysis(atoms, xtb_hessian(atoms, 0, 0)).frequencies_cm
    turned = atoms.copy()
    turned.rotate(37.0, (1.0, 2.0, 0.5), center="COM")
    turned.translate((3.0, -1.0, 2.0))
    np.testing.assert_allclose(harmonic_analysis(turned, xtb_hessian(turned, 0, 0)).frequencies_cm, reference,
                               atol=0.5)
    half_step = harmonic_analysis(atoms, xtb_hessian(atoms, 0, 0, step_angstrom=STEP_ANGSTROM / 2)).frequencies_cm
    np.testing.assert_allclose(half_step, reference, atol=1.0)


HF_STO3G = Level(name="hf-sto3g", method="hf", basis="sto-3g", ecp=None, density_fit=False, conv_tol=1e-10)


def test_hf_sto3g_water_matches_cccbdb():
    # HF/STO-3G H2O: r(OH) 0.989 Å, HOH 100.0°, harmonic frequencies 2170, 4140, 4391 cm⁻¹ (NIST CCCBDB,
    # computed entries for H2O at HF/STO-3G; from memory).
    start = molecule("H2O")
    atoms = relaxed(start, PyscfPotential(start, 0, 0, HF_STO3G))
    assert atoms.get_distance(0, 1) == pytest.approx(0.989, abs=0.001)
    assert atoms.get_angle(1, 0, 2) == pytest.approx(100.0, abs=0.1)
    _, hessian, result = energy_hessian(atoms, 0, 0, HF_STO3G)
    assert result.converged
    np.testing.assert_allclose(harmonic_analysis(atoms, hessian).frequencies_cm, [2170, 4140, 4391], atol=2.0)


# B3LYP-D3(BJ) with density fitting and C-PCM exercises every piece of the analytic path (PySCF's RKS/UKS
# Hessian with density fitting and solvent, plus our D3(BJ) part); STO-3G and a tiny molecule keep it cheap.
B3LYP_PCM = Level(name="b3lyp-pcm", method="dft", functional="b3lyp", basis="sto-3g", ecp=None, grid_level=3,
                  solvent="acetonitrile", dispersion="d3bj", density_fit=True, conv_tol=1e-10)


@pytest.mark.parametrize("charge, spin2s", [(0, 0), (1, 1)])
def test_analytic_hessian_matches_finite_differences(charge, spin2s):
    # Internal consistency: the analytic second derivative equals the central difference of analytic
    # gradients (common practice, no source), for a closed shell (RKS) and a doublet (UKS). The three
    # columns of the oxygen atom keep it cheap (6 gradients, each seeded with the reference density).
    atoms = molecule("H2O")
    _, analytic, reference = energy_hessian(atoms, charge, spin2s, B3LYP_PCM)
    form = "restricted" if reference.restricted else "unrestricted"
    assert form == ("restricted" if spin2s == 0 else "unrestricted")
    step_bohr = STEP_ANGSTROM / BOHR_ANGSTROM
    oxygen = [move for move in displacements(atoms) if move.atom == 0]
    gradients = [energy_gradient(Atoms(atoms.symbols, move.positions_angstrom), charge, spin2s, B3LYP_PCM,
                                 guess=reference, form=form)[1].ravel() for move in oxygen]
    numeric = np.array([(gradients[2 * k] - gradients[2 * k + 1]) / (2 * step_bohr) for k in range(3)]).T
    np.testing.assert_allclose(analytic[:, :3], numeric, atol=1e-3)
    assert np.abs(analytic[:, :3]).max() > 0.3  # the O–H stretch constants, not an empty comparison


def test_nickel_tetracarbonyl_co_stretches_split_one_plus_three():
    # Td Ni(CO)4: the four C–O stretches span A1 + T2, so they come as one single and one triply degenerate
    # frequency, the in-phase A1 above the IR-active T2 (F. A. Cotton, Chemical Applications of Group
    # Theory, 3rd ed., Wiley 1990; from memory). Gas-phase A1 2128 and T2 2058 cm⁻¹ (L. H. Jones,
    # R. S. McDowell, M. Goldblatt, Inorg. Chem. 1969, 8, 2349; from memory): checked only loosely.
    cx = complex_from_formula("[Ni(CO)4]")
    start = build(cx, "T-4")
    outcome = relax(start, XtbPotential(start.get_chemical_symbols(), 0, 0), "free", "T-4", convergence="tight")
    assert outcome.converged
    frequencies = harmonic_analysis(outcome.atoms, xtb_hessian(outcome.atoms, 0, 0)).frequencies_cm
    assert len(imaginary_modes(frequencies)) == 0 and frequencies[0] > 0
    t2, a1 = frequencies[-4:-1], frequencies[-1]
    assert t2.max() - t2.min() < 1.0
    assert a1 - t2.mean() > 20.0
    assert 1900 < t2.mean() < a1 < 2300
    assert frequencies[-5] < 1000  # nothing else near the C–O stretches


def test_planar_ammonia_is_a_saddle_point_and_displacement_leaves_it():
    # Planar NH3 (D3h) is the transition state of the umbrella inversion: one imaginary mode (fact of the
    # trade, e.g. P. W. Atkins, Molecular Quantum Mechanics; common practice, no source).
    planar = Atoms("NH3", positions=[[0, 0, 0], [1.0, 0, 0], [-0.5, 0.866, 0], [-0.5, -0.866, 0]])
    potential = XtbPotential(planar.get_chemical_symbols(), 0, 0, accuracy=0.01)
    # Relax within the plane only (the plane is kept by symmetry): the saddle point itself.
    saddle = relaxed(planar, potential)
    assert np.abs(saddle.positions[:, 2]).max() < 1e-6
    vibrations = harmonic_analysis(saddle, xtb_hessian(saddle, 0, 0))
    found = imaginary_modes(vibrations.frequencies_cm)
    assert len(found) == 1 and vibrations.frequencies_cm[found[0]] < -500
    umbrella = vibrations.modes[found[0]]
    assert np.abs(umbrella[:, :2]).max() < 1e-6  # an out-of-plane motion
    pushed = displace_along(saddle, umbrella, 0.1)
    assert np.linalg.norm(pushed.positions - saddle.positions, axis=1).max() == pytest.approx(0.1)
    assert potential(pushed.positions)[0] < potential(saddle.positions)[0]


def test_imaginary_threshold_and_bad_input():
    # Imaginary modes above the threshold only, most imaginary first (fourfold's convention).
    assert list(imaginary_modes([-25.0, -80.0, -10.0, 5.0, 100.0])) == [1, 0]
    assert list(imaginary_modes([-25.0, -10.0], threshold_cm=5.0)) == [0, 1]
    with pytest.raises(InputError, match="6N gradients"):
        hessian_from_gradients([np.zeros((2, 3))] * 5, STEP_ANGSTROM)
    with pytest.raises(InputError, match="Hessian for 3 atoms"):
        harmonic_analysis(molecule("H2O"), np.zeros((6, 6)))


def test_displacements_are_separate_jobs_in_assembly_order():
    # 6N displaced structures with unique labels (job keys), each moving one coordinate by ± one step
    # (central differences; common practice, no source).
    atoms = molecule("H2O")
    moves = displacements(atoms)
    assert len(moves) == 18 and len({move.label for move in moves}) == 18
    assert [move.label for move in moves[:3]] == ["0x+", "0x-", "0y+"]
    for move in moves:
        shift = move.positions_angstrom - atoms.get_positions()
        assert np.count_nonzero(shift) == 1
        assert shift[move.atom, move.axis] == pytest.approx(move.sign * STEP_ANGSTROM)
