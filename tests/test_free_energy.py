"""Frequencies as jobs, free energies and spin-only moments through the whole pipeline at `screen`."""

import json

import pytest

from conftest import run_fourfold
from fourfold.study.jobs import expand
from fourfold.study.recipe import parse_recipe

SPIN_ONLY_MU_B = {0: 0.0, 2: 2.83}  # √(n(n+2)) μB (Greenwood & Earnshaw, Chemistry of the Elements 1997; from memory)


@pytest.fixture(scope="module")
def nickel(tmp_path_factory):
    folder = tmp_path_factory.mktemp("freq") / "nicl4"
    done = run_fourfold("run", "--formula", "[NiCl4]2-", "--level", "screen", "--json", "--quiet", "--out", str(folder))
    assert done.returncode == 0, done.stderr
    return folder, json.loads(done.stdout)


def test_every_free_state_has_frequencies_free_energy_and_moment(nickel):
    _, result = nickel
    free = [s for s in result["states"] if s["kind"] == "free"]
    assert len(free) == 4
    for state in free:
        assert state["n_imaginary"] == 0  # the minimum check leaves no mode beyond 20i cm⁻¹
        assert len(state["frequencies_cm"]) == 3 * 5 - 6  # a nonlinear five-atom molecule (common practice)
        assert state["gibbs_hartree"] < state["enthalpy_hartree"]  # −TS < 0 at 298 K
        assert state["zpe_hartree"] > 0
        assert state["mu_eff_spin_only"] == pytest.approx(SPIN_ONLY_MU_B[state["spin2s"]], abs=0.005)
    assert result["ground"]["spin2s"] == 2 and result["ground_by_gibbs"]["ended_as"] == "T-4"
    assert result["ground"]["mu_eff_spin_only"] == pytest.approx(2.83, abs=0.005)


def test_the_planar_singlet_loses_free_energy_to_entropy(nickel):
    # Tetrahedral forms are favoured by entropy over planar ones (the planar ⇌ tetrahedral equilibria of
    # NiX2(PR3)2: ΔS > 0 towards T-4, Que & Pignolet, Inorg. Chem. 1973, from memory): ΔG(SP-4 singlet) −
    # ΔG(T-4 triplet) exceeds the ΔE difference, helped by the triplet's R ln 3.
    _, result = nickel
    free = {(s["arrangement"], s["spin2s"]): s for s in result["states"] if s["kind"] == "free"}
    singlet, triplet = free[("SP-4", 0)], free[("T-4", 2)]
    delta_e = singlet["energy_hartree"] - triplet["energy_hartree"]
    delta_g = singlet["gibbs_hartree"] - triplet["gibbs_hartree"]
    assert delta_g > delta_e


def test_frequency_jobs_resume_like_any_other(nickel):
    folder, _ = nickel
    again = run_fourfold("run", "--formula", "[NiCl4]2-", "--level", "screen", "--quiet", "--out", str(folder))
    assert again.returncode == 0, again.stderr
    assert "(0 run now, 12 already in the store)" in again.stdout


def test_frequencies_follow_free_relaxations_only_and_can_be_switched_off():
    text = "level = 'quick'\nrelaxations = ['held', 'free']\n[[complex]]\nformula = '[NiCl4]2-'\n"
    jobs = expand(parse_recipe(text, "f"))
    frequency_jobs = [j for j in jobs if j.task == "frequencies"]
    assert len(frequency_jobs) == 4 and all(j.spec.kind == "free" for j in frequency_jobs)
    single_points = [j for j in jobs if j.task == "single-point" and j.spec.kind == "free"]
    assert {j.parent for j in single_points} == {j.key for j in frequency_jobs}
    off = expand(parse_recipe("frequencies = false\n" + text, "f"))
    assert not [j for j in off if j.task == "frequencies"]


def test_the_spin_ladder_can_show_free_energies(nickel):
    from fourfold.pipeline import open_store
    from fourfold.report.figures import ladder_figure
    from fourfold.study.recipe import load_folder_study
    from fourfold.verdict.comparison import comparison_from_store

    folder, _ = nickel
    c = comparison_from_store(load_folder_study(folder), open_store(folder)).complexes[0]
    g_figure = ladder_figure(c, energy="G")
    assert g_figure.axes[0].get_ylabel().startswith("relative free energy G")
    plotted = {line.get_gid(): line.get_ydata()[0] for line in g_figure.axes[0].lines
               if (line.get_gid() or "").startswith("calc:")}
    expected = {"calc:SP-4:0": next(r.relative_gibbs_kj_mol for r in c.records
                                     if r.kind == "free" and (r.arrangement, r.spin2s) == ("SP-4", 0))}
    assert plotted["calc:SP-4:0"] == expected["calc:SP-4:0"]
