"""PySCF engine: reference energies, ECP rules, the SCF ladder, broken symmetry, D3(BJ), C-PCM gradients."""

import numpy as np
import pytest
from ase import Atoms

from fourfold.compute import pyscf_engine as engine
from fourfold.compute.levels import custom_level
from fourfold.errors import ComputeError, InputError, NotConverged
from fourfold.units import BOHR_ANGSTROM

HF_STO3G = custom_level({"name": "hf-sto3g", "method": "hf", "basis": "sto-3g", "ecp": "none",
                         "density_fit": False, "conv_tol": 1e-11})


def crawford_water() -> Atoms:
    # CrawfordGroup ProgrammingProjects, Project #3 (2021), input/h2o/STO-3G/geom.dat (bohr)
    bohr = np.array([[0.0, -0.143225816552, 0.0],
                     [1.638036840407, 1.136548822547, 0.0],
                     [-1.638036840407, 1.136548822547, 0.0]])
    return Atoms("OH2", positions=bohr * BOHR_ANGSTROM)


def square_pdcl4(distance_angstrom=2.31) -> Atoms:
    square = np.array([[1, 0, 0], [0, 1, 0], [-1, 0, 0], [0, -1, 0]], float) * distance_angstrom
    return Atoms("PdCl4", positions=np.vstack([[0, 0, 0], square]))


def h2(distance_angstrom) -> Atoms:
    return Atoms("H2", positions=[[0, 0, 0], [0, 0, distance_angstrom]])


def test_water_rhf_sto3g_reproduces_the_crawford_reference():
    # CrawfordGroup ProgrammingProjects, Project #3, 2021: E(RHF/STO-3G) = -74.942079928192 Eh
    result = engine.run_scf(crawford_water(), 0, 0, HF_STO3G)
    assert result.converged and result.rung == "diis" and result.restricted
    assert result.energy_hartree == pytest.approx(-74.942079928192, abs=1e-8)
    assert not result.broken_symmetry and result.aufbau and result.homo_lumo_gap_hartree > 0


def test_palladium_without_ecp_is_refused_and_auto_gives_the_def2_ecp():
    with pytest.raises(ComputeError, match="ECP"):
        engine.build_mole(square_pdcl4(), -2, 0, "def2-svp", ecp=None)
    mol = engine.build_mole(square_pdcl4(), -2, 0, "def2-svp", ecp="auto")
    assert mol.has_ecp()
    # def2 ECP of Pd replaces 28 core electrons (Andrae et al., Theor. Chim. Acta 1990, 77, 123; from memory)
    assert mol.atom_nelec_core(0) == 28 and mol.atom_nelec_core(1) == 0


def test_auto_ecp_needs_a_def2_basis():
    with pytest.raises(InputError, match="def2"):
        engine.build_mole(square_pdcl4(), -2, 0, "sto-3g", ecp="auto")


def test_impossible_electron_parity_is_an_input_error():
    with pytest.raises(InputError, match="parity"):
        engine.build_mole(crawford_water(), 0, 1, "sto-3g", ecp=None)  # 10 electrons cannot give 2S = 1


def test_the_ladder_converges_what_capped_diis_does_not_and_records_the_rung():
    # From the minao guess RHF/STO-3G water needs about 7 DIIS cycles, so two cannot converge it.
    # form="restricted": the whole ladder in RHF (an unforced singlet would move on to the UKS search).
    capped = engine.run_scf(crawford_water(), 0, 0, HF_STO3G, cycle_cap_first_rung=2, form="restricted")
    assert capped.converged and capped.rung == "shift_damp"
    assert capped.cycles > 2
    # same state as the uncapped run: CrawfordGroup ProgrammingProjects, Project #3, 2021
    assert capped.energy_hartree == pytest.approx(-74.942079928192, abs=1e-8)


def test_non_convergence_is_a_recorded_result_and_a_relaxer_gets_not_converged():
    # One cycle per rung cannot converge stretched N2 (RKS, then the broken-symmetry UKS search) nor the
    # Fe atom quintet; the ladder must return a result, not raise.
    one_cycle = custom_level({**HF_STO3G.to_dict(), "max_cycles": 1})
    result = engine.run_scf(Atoms("N2", positions=[[0, 0, 0], [0, 0, 2.0]]), 0, 0, one_cycle)
    assert not result.converged and result.rung is None and "not converged" in result.reason
    assert result.cycles == 1 + len(engine.RUNGS) + 1  # RKS DIIS, then the UKS ladder (smearing: 2 SCFs)
    with pytest.raises(NotConverged) as info:
        engine.energy_gradient(Atoms("Fe", positions=[[0, 0, 0]]), 0, 4, one_cycle)
    assert info.value.result.converged is False


def test_stretched_h2_singlet_is_reported_as_broken_symmetry():
    # Textbook (Szabo & Ostlund, Modern Quantum Chemistry, §3.8.7, from memory): beyond the
    # Coulson–Fischer point RHF is unstable towards UHF; at dissociation the UHF "singlet" is an equal
    # mixture of singlet and triplet, <S²> → 1, and its energy → twice the H-atom energy.
    stretched = engine.run_scf(h2(3.0), 0, 0, HF_STO3G)
    atom = engine.run_scf(Atoms("H", positions=[[0, 0, 0]]), 0, 1, HF_STO3G)
    assert stretched.converged and stretched.broken_symmetry and not stretched.restricted
    assert stretched.s2 == pytest.approx(1.0, abs=0.05) and stretched.spin_contaminated
    assert stretched.energy_hartree == pytest.approx(2 * atom.energy_hartree, abs=2e-3)
    # Near equilibrium (0.74 Å) the closed shell is stable: no broken symmetry is invented.
    bonded = engine.run_scf(h2(0.74), 0, 0, HF_STO3G)
    assert bonded.restricted and not bonded.broken_symmetry and bonded.s2 == 0.0
    # H2 RHF/STO-3G at 1.4 bohr: -1.1167 Eh (Szabo & Ostlund 1996, from memory)
    assert engine.run_scf(h2(1.4 * BOHR_ANGSTROM), 0, 0, HF_STO3G).energy_hartree == pytest.approx(-1.1167, abs=1e-4)


def test_d3bj_matches_the_s_dftd3_documentation():
    # s-dftd3 1.7.0 documentation (dftd3.pyscf.DFTD3Dispersion.kernel docstring): PBE0-D3(BJ) for this
    # BrBr...NCH geometry gives -0.00303589 Eh and these gradient z components.
    atoms = Atoms("Br2NCH", positions=[[0, 0, 1.919978], [0, 0, -0.367147], [0, 0, -3.235006],
                                       [0, 0, -4.376626], [0, 0, -5.444276]])
    level = custom_level({"functional": "pbe0", "basis": "sto-3g", "dispersion": "d3bj"})
    mol = engine.build_mole(atoms, 0, 0, "sto-3g", ecp=None)
    energy, gradient = engine.dispersion_correction(mol, level)
    assert energy == pytest.approx(-0.00303589, abs=1e-8)
    assert gradient[:, 2] == pytest.approx([9.66197638e-05, 2.36000434e-04, -1.16718302e-04,
                                            -1.84332770e-04, -3.15691249e-05], abs=1e-10)


def test_gradient_with_cpcm_and_d3_matches_finite_differences():
    # Analytic gradient = derivative of the energy (central differences; common practice, no source).
    level = custom_level({"functional": "b3lyp", "basis": "sto-3g", "grid_level": 3, "solvent": "water",
                          "dispersion": "d3bj", "conv_tol": 1e-11})
    atoms = crawford_water()
    _, gradient, result = engine.energy_gradient(atoms, 0, 0, level, form="restricted")
    step_angstrom = 1e-3
    moved = []
    for sign in (1, -1):
        shifted = atoms.copy()
        shifted.positions[1, 1] += sign * step_angstrom
        moved.append(engine.run_scf(shifted, 0, 0, level, guess=result, form="restricted").energy_hartree)
    numeric = (moved[0] - moved[1]) / (2 * step_angstrom / BOHR_ANGSTROM)
    assert result.dispersion_hartree < 0
    assert gradient[1, 1] == pytest.approx(numeric, abs=2e-5)


def test_potential_reuses_the_previous_density():
    level = custom_level({"functional": "b3lyp", "basis": "sto-3g", "grid_level": 1, "conv_tol": 1e-9})
    atoms = crawford_water()
    potential = engine.PyscfPotential(atoms, 0, 0, level)
    positions = atoms.positions.copy()
    potential(positions)
    positions[1, 1] += 0.01
    energy, gradient = potential(positions)
    moved = atoms.copy()
    moved.positions = positions
    cold = engine.run_scf(moved, 0, 0, level)
    assert gradient.shape == (3, 3)
    assert energy == pytest.approx(cold.energy_hartree, abs=1e-7)
    assert potential.last.cycles < cold.cycles


def test_chkfile_and_other_basis_guesses_reach_the_same_state(tmp_path):
    chk = tmp_path / "water.chk"
    small = engine.run_scf(crawford_water(), 0, 0, HF_STO3G, chkfile=chk)
    again = engine.run_scf(crawford_water(), 0, 0, HF_STO3G, guess=chk)
    assert again.cycles < small.cycles
    assert again.energy_hartree == pytest.approx(small.energy_hartree, abs=1e-9)
    bigger = custom_level({**HF_STO3G.to_dict(), "basis": "6-31g"})
    projected = engine.run_scf(crawford_water(), 0, 0, bigger, guess=small)
    cold = engine.run_scf(crawford_water(), 0, 0, bigger)
    assert projected.converged and projected.energy_hartree == pytest.approx(cold.energy_hartree, abs=1e-8)


def test_pyscf_output_goes_to_the_log_not_the_terminal(tmp_path, capfd):
    log = tmp_path / "logs" / "water.log"
    result = engine.run_scf(crawford_water(), 0, 0, HF_STO3G, log_path=log)
    out, err = capfd.readouterr()
    assert out == "" and err == ""
    assert result.log_path == str(log) and "converged SCF energy" in log.read_text()


def test_a_run_limits_every_thread_pool_and_leaves_the_caller_as_it_was():
    # Library hygiene (common practice, no source): a calculation may not change the caller's
    # environment or thread pools; inside it, every BLAS/OpenMP pool runs the requested count.
    import os

    from pyscf import lib
    from threadpoolctl import threadpool_info, threadpool_limits

    from fourfold.compute.threads import pyscf_threads

    with threadpool_limits(limits=2), lib.with_omp_threads(2):  # a caller with two threads, not the default
        environment, pools, omp = dict(os.environ), threadpool_info(), lib.num_threads()
        with pyscf_threads(1):
            assert lib.num_threads() == 1
            assert {pool["filepath"]: pool["num_threads"] for pool in threadpool_info()} == {
                pool["filepath"]: 1 for pool in threadpool_info()}
        engine.run_scf(crawford_water(), 0, 0, HF_STO3G, threads=1)
        assert dict(os.environ) == environment
        assert threadpool_info() == pools and lib.num_threads() == omp == 2


def test_triplet_hessian_of_minimal_basis_h2_is_the_closed_form():
    # Two-orbital RHF -> UHF (triplet) stability: (A + B) = (e_u - e_g) - J_gu - K_gu (Seeger & Pople,
    # J. Chem. Phys. 1977, 66, 3045; from memory). Negative past the Coulson-Fischer point (~1.2 A).
    from pyscf import ao2mo

    from fourfold.compute import stability
    from fourfold.compute.scf_ladder import mean_field

    for distance, unstable in ((0.74, False), (3.0, True)):
        mol = engine.build_mole(h2(distance), 0, 0, "sto-3g", ecp=None)
        mf = mean_field(mol, HF_STO3G, restricted=True, grid_level=0)
        mf.kernel()
        eri = ao2mo.kernel(mol, mf.mo_coeff, compact=False).reshape(2, 2, 2, 2)
        closed_form = mf.mo_energy[1] - mf.mo_energy[0] - eri[0, 0, 1, 1] - eri[0, 1, 1, 0]
        eigenvalue, uks_density = stability.rks_to_uks_instability(mf)
        assert eigenvalue == pytest.approx(closed_form, abs=1e-6)
        assert (uks_density is not None) == unstable


def test_gas_phase_dianion_gets_a_note():
    level = custom_level({"functional": "b3lyp", "basis": "def2-svp", "grid_level": 1})
    oxide = engine.run_scf(Atoms("O", positions=[[0, 0, 0]]), -2, 0, level)
    assert any("gas phase" in note for note in oxide.notes)
