"""State search: several SCF starts per state, internal stability followed downhill, the lowest kept.

The facts relied on: the Kohn–Sham/Hartree–Fock equations of an open-shell molecule have several
self-consistent solutions, which one an SCF reaches depends on its start, and the lowest stable one is the
best approximation of that spin state's ground state (Thom & Head-Gordon, Phys. Rev. Lett. 2008, 101,
193001; from memory); a solution with a negative orbital-Hessian eigenvalue is a saddle point, and a step
along that eigenvector lowers the energy (Seeger & Pople, J. Chem. Phys. 1977, 66, 3045; from memory).
"""

import numpy as np
import pytest
from ase import Atoms

from fourfold.chem.complex import complex_from_formula
from fourfold.compute import pyscf_engine as engine
from fourfold.compute import state_search
from fourfold.compute.dblock import target_for
from fourfold.compute.levels import custom_level, get_level
from fourfold.geometry.builder import build
from fourfold.units import HARTREE_KJ_MOL

WATER = Atoms("OH2", positions=[[0, 0, 0], [0.76, 0.59, 0], [-0.76, 0.59, 0]])
HF_STO3G = custom_level({"name": "hf-sto3g", "method": "hf", "basis": "sto-3g", "ecp": "none",
                         "density_fit": False, "conv_tol": 1e-10})


def test_spin_character_is_judged_against_the_next_spin_state():
    # S(S+1) for S = 0, 1/2, 1 and the midpoints to (S+1)(S+2): 1, 2.25, 4 (spin algebra; common
    # practice, no source). A two-electron broken-symmetry singlet sits at <S²> = 1.
    assert state_search.right_spin_character(1.02, 0)
    assert not state_search.right_spin_character(2.0, 0)
    assert state_search.right_spin_character(1.75, 1)       # three open shells, one of them β
    assert not state_search.right_spin_character(3.70, 1)   # a quartet in disguise
    assert state_search.right_spin_character(2.01, 2) and not state_search.right_spin_character(4.5, 2)


def test_a_stable_closed_shell_ends_the_search_and_says_so():
    # Water's RHF/STO-3G ground state is a stable closed shell (CrawfordGroup ProgrammingProjects,
    # Project #3, 2021, E = -74.942079928192 Eh at their geometry): no other start is run.
    result = engine.run_scf(WATER, 0, 0, HF_STO3G, neighbour_guesses=[np.eye(7)])
    assert result.restricted and len(result.starts) == 1 and result.start_won == "default (RKS)"
    assert result.stability_eigenvalue > 0 and result.spread_kj_mol == 0.0
    assert any("starts skipped" in note for note in result.notes)


def test_the_oxygen_molecule_triplet_saddle_is_followed_down_to_the_minimum():
    # UHF/6-31G O2 triplet at 1.3 Å: the default start converges to a solution with a negative
    # internal-stability eigenvalue (PySCF's own uhf_internal analysis agrees, -0.10 Eh); a step along it
    # lowers the energy (Seeger & Pople 1977). The record keeps the first and the final energy.
    level = custom_level({"name": "hf-631g", "method": "hf", "basis": "6-31g", "ecp": "none",
                          "density_fit": False, "conv_tol": 1e-9})
    oxygen = Atoms("O2", positions=[[0, 0, 0], [0, 0, 1.3]])
    single = engine.run_scf(oxygen, 0, 2, level, search_starts=False)
    searched = engine.run_scf(oxygen, 0, 2, level)
    record = searched.starts[0]
    assert record["first_energy_hartree"] == pytest.approx(single.energy_hartree, abs=1e-7)
    assert record["instabilities_followed"] >= 1
    assert searched.energy_hartree < single.energy_hartree - 1e-3
    assert searched.stability_eigenvalue > 0 and searched.right_spin_character


def test_open_shells_get_a_huckel_and_a_neighbour_spin_start():
    # UHF/6-31G O2 triplet at 1.3 Å (the saddle case above): besides the default start, a Hückel guess
    # (Lehtola, J. Chem. Theory Comput. 2019, 15, 1593) and the singlet converged at the same geometry
    # seed their own SCFs. Each search ends on the lowest converged solution of the right spin character
    # (Thom & Head-Gordon 2008), and the neighbour's own cycles are counted.
    level = custom_level({"name": "hf-631g", "method": "hf", "basis": "6-31g", "ecp": "none",
                          "density_fit": False, "conv_tol": 1e-9})
    oxygen = Atoms("O2", positions=[[0, 0, 0], [0, 0, 1.3]])
    result = engine.run_scf(oxygen, 0, 2, level, neighbour_spins=(0,))
    labels = [start["label"] for start in result.starts]
    assert labels[:3] == ["default", "Hückel guess", "neighbour 2S=0"]
    assert result.energy_hartree <= min(s["energy_hartree"] for s in result.starts if s["converged"]) + 1e-9
    assert any("neighbour spin states converged at this geometry" in note for note in result.notes)
    assert result.cycles > sum(start["cycles"] for start in result.starts)
    assert result.right_spin_character and result.stability_eigenvalue > 0


def test_a_stable_closed_shell_never_pays_for_its_neighbour():
    # Water's RHF/STO-3G closed shell is stable (CrawfordGroup ProgrammingProjects, Project #3, 2021): the
    # triplet that would seed a broken-symmetry search is never converged.
    result = engine.run_scf(WATER, 0, 0, HF_STO3G, neighbour_spins=(2,))
    assert len(result.starts) == 1
    assert not any("neighbour spin states converged" in note for note in result.notes)


def test_the_d_configuration_start_holds_the_intended_occupation_in_any_frame():
    # T-4 [CoCl4]2- quartet: e^4 t2^3 with all three t2 electrons α (ligand-field theory of d7 in Td;
    # Figgis & Hitchman, Ligand Field Theory and Its Applications, 2000, from memory). The start density
    # built to it must hold exactly that occupation, be a proper density (idempotent per spin, the right
    # electron counts), and stay so when the molecule is turned (the d functions turn with it).
    from fourfold.compute.dblock import d_configuration_density, occupation_matches, target_occupations

    cx = complex_from_formula("[CoCl4]2-")
    quartet, doublet = target_for(cx, "T-4", 3), target_for(cx, "T-4", 1)
    assert quartet.alpha == (1, 1, 1, 1, 1) and quartet.beta == (1, 1, 0, 0, 0)
    assert [len(group) for group in quartet.groups()] == [2, 3]   # e below t2
    atoms = build(cx, "T-4")
    atoms.rotate(37, (1, 2, 3))
    mol = engine.build_mole(atoms, cx.charge, 3, "def2-svp")
    fock = mol.UKS(xc="b3lyp").get_fock(dm=mol.UKS().get_init_guess())  # the minao guess's operator
    density = d_configuration_density(mol, fock, quartet)
    overlap = mol.intor_symmetric("int1e_ovlp")
    for spin, electrons in enumerate(mol.nelec):
        assert np.trace(density[spin] @ overlap) == pytest.approx(electrons)
        assert density[spin] @ overlap @ density[spin] == pytest.approx(density[spin], abs=1e-8)
    occupations = target_occupations(mol, fock, density, quartet)
    assert occupations == pytest.approx(np.array((quartet.alpha, quartet.beta)), abs=1e-8)
    assert occupation_matches(occupations, quartet) and not occupation_matches(occupations, doublet)


def _cocl4_doublet_search(level, every_start: bool):
    cx = complex_from_formula("[CoCl4]2-")
    atoms = build(cx, "T-4")
    quartet = engine.run_scf(atoms, cx.charge, 3, level, search_starts=False)
    if not every_start:  # the parent guess and its instabilities only
        return engine.run_scf(atoms, cx.charge, 1, level, guess=quartet)
    return engine.run_scf(atoms, cx.charge, 1, level, guess=quartet, neighbour_guesses=[quartet],
                          d_target=target_for(cx, "T-4", 1))


def _assert_lowest_doublet_reached(result, below_kj_mol):
    # The quartet's density as the only start lands on a doublet far above the lowest one; the search
    # (that solution's instability followed, and at quick also the quartet's own α/β densities and the
    # d-configuration start) must end on the lowest.
    first = result.starts[0]
    assert first["label"] == "default"
    assert (first["first_energy_hartree"] - result.energy_hartree) * HARTREE_KJ_MOL > below_kj_mol
    assert result.energy_hartree <= min(s["energy_hartree"] for s in result.starts if s["converged"]) + 1e-9
    assert result.stability_eigenvalue > 0 and result.right_spin_character
    assert result.s2 == pytest.approx(1.75, abs=0.05)  # three open shells (two α, one β)


def test_cocl4_doublet_reaches_the_lowest_solution_small_basis():
    # STO-3G variant of the quick-level case below (measured: the quartet's density lands 107 kJ/mol above).
    result = _cocl4_doublet_search(custom_level({"base": "quick", "basis": "sto-3g", "ecp": "none"}), False)
    _assert_lowest_doublet_reached(result, below_kj_mol=50)


@pytest.mark.slow
def test_cocl4_doublet_reaches_the_lowest_solution_at_quick():
    # B3LYP-D3(BJ)/def2-SVP (measured: the quartet's density lands 96 kJ/mol above the lowest doublet).
    _assert_lowest_doublet_reached(_cocl4_doublet_search(get_level("quick"), True), below_kj_mol=50)


def _assert_lowest_kept(found: dict) -> None:
    # Two solutions closer than the search's LOWER_ENERGY_HARTREE count as one; the first found is kept.
    lowest = min(s["energy_hartree"] for s in found["starts"] if s["converged"])
    assert found["energy_hartree"] <= lowest + state_search.LOWER_ENERGY_HARTREE


def _default_single_point(formula: str, arrangement: str, spin2s: int, atoms, engine_changes=None) -> dict:
    """The single point a default `quick` study runs for this state (its JobSpec from the study's own job
    list), at ``atoms``; ``engine_changes`` alter its level (a smaller basis for the fast variant)."""
    from dataclasses import replace

    from fourfold.compute.tasks import run_task
    from fourfold.study.jobs import expand
    from fourfold.study.recipe import parse_recipe

    study = parse_recipe(f'level = "quick"\nrelaxations = ["free"]\n[[complex]]\nformula = "{formula}"\n')
    spec = next(job.spec for job in expand(study) if job.task == "single-point" and job.spec.arrangement == arrangement
                and job.spec.spin2s == spin2s)
    if engine_changes:
        spec = replace(spec, engine={**spec.engine, **engine_changes})
    parent = {"symbols": atoms.get_chemical_symbols(), "positions_angstrom": atoms.get_positions().tolist(),
              "converged": True, "geometry_converged": True, "status": "done", "warnings": []}
    return run_task("single-point", spec, parent)


def test_the_default_job_passes_every_start(monkeypatch):
    # The single point a default study runs asks the engine for the neighbouring spin state and the
    # d-configuration start (the state search of compute/state_search.py; its behaviour is pinned by the
    # engine-level tests above and by the slow job-level tests below, which run minutes at quick).
    from fourfold.compute import tasks

    asked = {}

    def fake_run_scf(atoms, charge, spin2s, level, **options):
        asked.update(options, spin2s=spin2s)
        raise RuntimeError("stop after the call")

    monkeypatch.setattr(engine, "run_scf", fake_run_scf)
    cx = complex_from_formula("[CoCl4]2-")
    with pytest.raises(RuntimeError, match="stop after the call"):
        _default_single_point("[CoCl4]2-", "T-4", 1, build(cx, "T-4"))
    assert asked["spin2s"] == 1 and asked["neighbour_spins"] == (3,)
    assert asked["d_target"].as_dict() == target_for(cx, "T-4", 1).as_dict()
    assert tasks.neighbour_spin(2) == 0 and tasks.neighbour_spin(0) == 2


@pytest.mark.slow
def test_the_default_job_reaches_the_lowest_cocl4_doublet_at_quick():
    # As above at quick (B3LYP-D3(BJ)/def2-SVP, C-PCM acetonitrile for the dianion): the default command's
    # own job, not a hand-made search.
    cx = complex_from_formula("[CoCl4]2-")
    found = _default_single_point("[CoCl4]2-", "T-4", 1, build(cx, "T-4"))
    _assert_lowest_kept(found)
    neighbour = next(s for s in found["starts"] if s["label"] == "neighbour 2S=3")
    assert neighbour["converged"]  # the quartet-density start ran (alone it lands far above: the test above)
    assert found["s2"] == pytest.approx(1.75, abs=0.05) and found["right_spin_character"]


# GFN2-xTB (tblite) relaxation of the SP-4 [NiCl4]2- triplet with the Cl–Ni–Cl angles held (fourfold's
# own run, rounded to 1e-5 Å): Ni–Cl 2.285–2.290 Å.
NICL4_SP4_HELD = Atoms("NiCl4", positions=[
    [-0.00035, 0.00449, 0.0], [2.28998, 0.00449, 0.0], [-0.00035, 2.28914, 0.0],
    [-2.29026, 0.00449, 0.0], [-0.00035, -2.28539, 0.0]])


@pytest.mark.slow
def test_nicl4_square_planar_triplet_reaches_the_lower_solution_at_quick():
    # Measured: from the default guess the triplet lands 55 kJ/mol above the solution reached from the
    # singlet's density; that solution is a saddle point. No smaller basis reproduces the pair (STO-3G
    # gives a triplet with <S²> 3.1, PBE/def2-SVP a single solution), so this case runs at quick only.
    level = get_level("quick")
    cx = complex_from_formula("[NiCl4]2-")
    singlet = engine.run_scf(NICL4_SP4_HELD, cx.charge, 0, level, search_starts=False)
    result = engine.run_scf(NICL4_SP4_HELD, cx.charge, 2, level, neighbour_guesses=[singlet],
                            d_target=target_for(cx, "SP-4", 2))
    first = result.starts[0]
    assert (first["first_energy_hartree"] - result.energy_hartree) * HARTREE_KJ_MOL > 40
    assert result.energy_hartree <= min(s["energy_hartree"] for s in result.starts if s["converged"]) + 1e-9
    assert result.stability_eigenvalue > 0 and result.s2 == pytest.approx(2.0, abs=0.05)


@pytest.mark.slow
def test_the_default_job_reaches_the_lower_nicl4_square_planar_triplet():
    # The default command's own single point for the SP-4 [NiCl4]2- triplet (quick: C-PCM acetonitrile for
    # the dianion) at the held structure above: it must end at or below the solution the singlet's
    # density reaches (measured: the singlet-density start 0.06 kJ/mol above the default's solution here;
    # in the gas phase the default start alone lands 55 kJ/mol above it, the test above) and keep the
    # lowest of its starts, with the neighbour singlet among them.
    found = _default_single_point("[NiCl4]2-", "SP-4", 2, NICL4_SP4_HELD)
    neighbour = next(s for s in found["starts"] if s["label"] == "neighbour 2S=0")
    assert found["energy_hartree"] <= neighbour["energy_hartree"] + state_search.LOWER_ENERGY_HARTREE
    _assert_lowest_kept(found)
    assert found["s2"] == pytest.approx(2.0, abs=0.05) and found["stability_eigenvalue"] > 0
