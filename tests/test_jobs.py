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
    ("screen", {"relax-held": 6, "relax-free": 6}),
    ("quick", {"relax-held": 6, "relax-free": 6, "single-point": 12}),
    # standard: xTB held pre-relax (shared by held and free chains) → DFT relax → def2-TZVP single point
    ("standard", {"relax-held": 12, "relax-free": 6, "single-point": 12}),
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
