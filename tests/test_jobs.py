"""Job expansion: chains per level and the xTB solvent hand-over."""

import dataclasses

import pytest

from fourfold.chem.complex import complex_from_formula
from fourfold.compute.levels import get_level, known_solvents
from fourfold.compute.xtb_engine import XtbPotential
from fourfold.geometry.builder import build
from fourfold.study.jobs import expand, geometry_engine
from fourfold.study.recipe import parse_recipe

RECIPE = "level = '{level}'\nrelaxations = ['held', 'free']\n[[complex]]\nformula = '[NiCl2(PMe3)2]'\n"


@pytest.mark.parametrize("level,tasks", [
    # every free relaxation is followed by its frequency job (minimum check)
    ("screen", {"relax-held": 6, "relax-free": 6, "frequencies": 6}),
    ("quick", {"relax-held": 6, "relax-free": 6, "frequencies": 6, "single-point": 12}),
    # standard: xTB held pre-relax (shared by held and free chains) → DFT relax → def2-TZVP single point
    ("standard", {"relax-held": 12, "relax-free": 6, "frequencies": 6, "single-point": 12}),
])
def test_chains_per_level(level, tasks):
    # T-4, SP-4 cis, SP-4 trans × 2S = 0, 2: six states (MA2B2 isomers: IUPAC 2005 IR-9.3)
    jobs = expand(parse_recipe(RECIPE.format(level=level)))
    counted = {}
    for job in jobs:
        counted[job.task] = counted.get(job.task, 0) + 1
    assert counted == tasks
    keys = {j.key for j in jobs}
    assert all(j.parent is None or j.parent in keys for j in jobs)
    assert sum(j.final for j in jobs) == 12


def test_quick_reuses_screen_geometry_jobs():
    screen = {j.key for j in expand(parse_recipe(RECIPE.format(level="screen")))}
    quick = {j.key for j in expand(parse_recipe(RECIPE.format(level="quick"))) if j.task != "single-point"}
    assert quick == screen


def test_every_solvent_reaches_xtb():
    # each solvent of the table must be usable by the xTB tier, by name or by its dielectric constant
    atoms = build(complex_from_formula("[NiCl4]2-"), "T-4")
    for solvent in known_solvents():
        engine = geometry_engine(dataclasses.replace(get_level("screen"), solvent=solvent))
        energy, _ = XtbPotential(atoms.get_chemical_symbols(), -2, 2, solvent=engine["solvent"])(atoms.get_positions())
        assert energy < 0


# Job keys of two fixed recipes as fourfold 0.1.0 computed them from its untyped job dicts (the code versions
# pinned, so only the job description enters): a JobSpec must give the same keys, or existing stores would
# recompute everything. The frequency step is switched off here because it is new in 0.2.0: it moved the keys
# of free chains' single points (their parent is now the frequency job), as the CHANGELOG says; so did the new
# PMe3 fragment, the custom-ligand fields and the continuum `quick` now gives ions, which is why these recipes
# hold none of them (the `quick` one is neutral).
KEY_RECIPES = {
    "quick": 'frequencies = false\ntitle = "key stability"\nlevel = "quick"\npath_points = 3\n[[complex]]\n'
             'formula = "[NiCl2(NH3)2]"\n',
    "standard": ('frequencies = false\ntitle = "key stability standard"\nlevel = "standard"\n'
                 'relaxations = ["held", "free"]\n[[complex]]\nformula = "[PdCl4]2-"\nspins = [0]\n'),
}
KEYS_BEFORE_JOBSPEC = {
    "quick": (48, "133cbba5234a31731ef581ff0cbb75a46e55e5241c8186b9a96eddc745f4a04e"),
    "standard": (10, "8232316012e43b453fd68c00304b19fab0103f8750979087bcc42c7a90c7dce0"),
}


@pytest.mark.parametrize("name", sorted(KEY_RECIPES))
def test_job_keys_unchanged_by_jobspec(name, monkeypatch):
    import hashlib

    from fourfold.study import jobs

    monkeypatch.setattr(jobs, "code_versions", lambda: {"fourfold": "0.1.0", "pyscf": "2.x", "tblite": "0.x",
                                                         "geometric": "1.x"})
    keys = sorted(j.key for j in jobs.expand(parse_recipe(KEY_RECIPES[name], name)))
    assert (len(keys), hashlib.sha256("".join(keys).encode()).hexdigest()) == KEYS_BEFORE_JOBSPEC[name]


@pytest.mark.parametrize("name", sorted(KEY_RECIPES))
def test_jobspec_round_trips_through_its_dict(name):
    from fourfold.study.jobs import JobSpec

    for job in expand(parse_recipe(KEY_RECIPES[name], name)):
        assert JobSpec.from_dict(job.spec.to_dict()) == job.spec


@pytest.mark.parametrize("name", sorted(KEY_RECIPES))
def test_recorded_recipe_gives_the_same_jobs_and_spells_out_the_level(name):
    import tomllib

    from fourfold.study.recipe import study_to_toml

    study = parse_recipe(KEY_RECIPES[name], name)
    text = study_to_toml(study)
    assert isinstance(tomllib.loads(text)["level"], dict)  # the level in full, not a preset's name
    again = parse_recipe(text, "recorded")
    assert [j.key for j in expand(again)] == [j.key for j in expand(study)]
    assert again.level == study.level
