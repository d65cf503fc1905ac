"""Studies with real processes: resume after SIGKILL, failures recorded, the run lock, keys.

All at the screen level (GFN2-xTB) on [NiCl4]2- so each job takes seconds.
"""

import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from conftest import run_fourfold as fourfold
from fourfold.errors import InputError
from fourfold.study.jobs import expand
from fourfold.study.recipe import load_recipe, parse_recipe
from fourfold.study.store import ResultStore

RECIPE = """
title = "reliability"
level = "screen"
relaxations = ["held"]
[run]
max_steps = 40

[[complex]]
formula = "[NiCl4]2-"

[[complex]]
formula = "[PdCl4]2-"
"""




@pytest.fixture()
def recipe(tmp_path):
    path = tmp_path / "study.toml"
    path.write_text(RECIPE)
    return path


def _rows(folder):
    with sqlite3.connect(folder / "results.db") as db:
        return {key: (row_id, status) for row_id, key, status in db.execute(
            "select systems.id, text_key_values.value, s.value from systems "
            "join text_key_values on text_key_values.id = systems.id and text_key_values.key = 'job_key' "
            "join text_key_values s on s.id = systems.id and s.key = 'status'")}


def _table(folder):
    store = ResultStore(folder / "results.db")
    return sorted((r["label"], r["status"], round(r["energy_hartree"], 8)) for r in store.results())


def test_keys_are_stable_and_change_with_settings():
    # same inputs -> same key; a changed setting -> a new key (fourfold's job key) [common practice, no source]
    first = {j.key for j in expand(parse_recipe(RECIPE))}
    again = {j.key for j in expand(parse_recipe(RECIPE))}
    changed = {j.key for j in expand(parse_recipe(RECIPE.replace("max_steps = 40", "max_steps = 41")))}
    assert first == again and not first & changed
    assert len(first) == 8  # 2 complexes × 2 arrangements × 2 spins, held only


def test_sigkill_then_resume_recomputes_nothing(tmp_path, recipe):
    reference = tmp_path / "reference"
    assert fourfold("run", str(recipe), "--out", str(reference), "--quiet").returncode == 0
    folder = tmp_path / "killed"
    process = subprocess.Popen([sys.executable, "-m", "fourfold.cli", "run", str(recipe), "--out", str(folder),
                                "--quiet"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.time() + 300
    while time.time() < deadline and (not (folder / "results.db").exists() or len(_rows(folder)) < 3):
        time.sleep(0.2)
    os.killpg(process.pid, signal.SIGKILL)  # the driver and its workers, as a reboot would
    process.wait()
    before = _rows(folder)
    assert 3 <= len(before) < 8
    rerun = fourfold("run", str(recipe), "--out", str(folder), "--quiet")
    assert rerun.returncode == 0, rerun.stderr
    after = _rows(folder)
    for key, (row_id, status) in before.items():
        assert after[key] == (row_id, status)  # not recomputed, not rewritten
    assert _table(folder) == _table(reference)
    assert f"{len(before)} already in the store" in rerun.stdout


def test_failures_are_recorded_and_others_finish(tmp_path, recipe):
    folder = tmp_path / "faults"
    faults = "raise:[NiCl4]2- T-4 2S=0,exit:[NiCl4]2- SP-4 2S=0,hang:[PdCl4]2- T-4 2S=0"
    result = fourfold("run", str(recipe), "--out", str(folder), "--quiet", "--timeout", "20",
                      env={"FOURFOLD_FAULT": faults})
    assert result.returncode == 0, result.stderr
    status = fourfold("status", str(folder), "--json")
    import json

    found = json.loads(status.stdout)
    assert (found["done"], found["failed"], found["pending"]) == (5, 3, 0)
    reasons = {f["label"]: f["reason"] for f in found["failures"]}
    assert "injected failure" in reasons["[NiCl4]2- T-4 2S=0 held"]
    assert "exited with status 3" in reasons["[NiCl4]2- SP-4 2S=0 held"]
    assert "timeout after 20 s" in reasons["[PdCl4]2- T-4 2S=0 held"]
    # a rerun without --retry-failed leaves the failures alone; with it they run (and now succeed)
    assert "0 run now" in fourfold("run", str(recipe), "--out", str(folder), "--quiet").stdout
    retried = fourfold("run", str(recipe), "--out", str(folder), "--quiet", "--retry-failed")
    assert "3 run now" in retried.stdout and "8 done" in retried.stdout


def test_second_run_on_same_folder_refuses(tmp_path, recipe):
    folder = tmp_path / "locked"
    first = subprocess.Popen([sys.executable, "-m", "fourfold.cli", "run", str(recipe), "--out", str(folder),
                              "--quiet"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    try:
        deadline = time.time() + 60
        while time.time() < deadline and not (folder / "run.lock").exists():
            time.sleep(0.1)
        time.sleep(0.5)
        second = fourfold("run", str(recipe), "--out", str(folder), "--quiet")
        assert second.returncode == 2
        assert "in use by a running fourfold" in second.stderr and len(second.stderr.strip().splitlines()) == 1
    finally:
        os.killpg(first.pid, signal.SIGKILL)
        first.wait()
    # the dead process holds nothing: the next run goes ahead
    assert fourfold("run", str(recipe), "--out", str(folder), "--quiet").returncode == 0


BAD_RECIPES = [
    ("title = 'x'\nlevel = 'screen'\n", "no [[complex]] entries"),
    ("level = 'screen'\n[[complex]]\nformula = '[NiCl4]2-'\ncolour = 'blue'\n", "unknown key 'colour'"),
    ("levle = 'screen'\n[[complex]]\nformula = '[NiCl4]2-'\n", "unknown key 'levle'"),
    ("level = 'ultra'\n[[complex]]\nformula = '[NiCl4]2-'\n", "unknown level 'ultra'"),
    ("level = 3\n[[complex]]\nformula = '[NiCl4]2-'\n", "level"),
    ("[[complex]]\nformula = '[NiCl4]2-'\n[[complex]]\nformula = '[NiCl4]2-'\n", "remove the duplicate"),
    ("[[complex]]\nformula = '[NiQ4]2-'\n", "unknown ligand 'Q'"),
    ("[[complex]]\nformula = '[NiCl4]3+'\n", "oxidation state +7"),
    ("[[complex]]\nformula = '[NiCl4]2-'\nspins = [1]\n", "wrong parity"),
    ("[[complex]]\nformula = 42\n", "must be a formula string"),
    ("arrangements = ['T-4', 'OC-6']\n[[complex]]\nformula = '[NiCl4]2-'\n", "unknown arrangement 'OC-6'"),
    ("relaxations = ['wobbly']\n[[complex]]\nformula = '[NiCl4]2-'\n", "use held, free or both"),
    ("path_points = 1\n[[complex]]\nformula = '[NiCl4]2-'\n", "at least 2"),
    ("[[complex]]\nformula = '[NiCl4]2-'\nestimate = { 'Cl.e_sigma' = 'big' }\n", "must be a number"),
    ("[[complex]]\nformula = '[NiCl4]2-'\nestimate = { 'Br.e_sigma' = 3 }\n", "cannot override 'Br.e_sigma'"),
    ("[ligands.X]\nxyz = 'N 0 0 0'\ncharge = 0\n[[complex]]\nformula = '[NiX4]2+'\n", "missing 'donor_index'"),
    ("[[complex]]\nmetal = 'Ni'\nligands = ['Cl', 'Cl', 'Cl', 'Cl']\n", "'oxidation_state' is missing"),
    ("[[complex]]\nmetal = 'Ni'\noxidation_state = 2\nligands = ['Cl','Cl','Cl','Cl']\ncharge = 0\n",
     "charge does not add up"),
    ("solvent = 'lava'\n[[complex]]\nformula = '[NiCl4]2-'\n", "unknown solvent 'lava'"),
    ("[run]\nworkers = 0\n[[complex]]\nformula = '[NiCl4]2-'\n", "must be positive"),
    ("[level]\nbase = 'quick'\nfunctionl = 'pbe0'\n[[complex]]\nformula = '[NiCl4]2-'\n", "functionl"),
    ("title = 'unclosed\n", "not valid TOML"),
]


@pytest.mark.parametrize("text,fragment", BAD_RECIPES)
def test_malformed_recipes_one_line_error(text, fragment):
    with pytest.raises(InputError) as caught:
        parse_recipe(text, "bad.toml")
    message = str(caught.value)
    assert "\n" not in message and fragment in message and message.startswith("bad.toml"), message


def test_malformed_recipe_exit_status_2_and_nothing_written(tmp_path):
    """The command-line contract for every InputError: one line on stderr, exit status 2, no folder made."""
    path = tmp_path / "bad.toml"
    path.write_text(BAD_RECIPES[0][0])
    result = fourfold("run", str(path), "--out", str(tmp_path / "out"))
    assert result.returncode == 2, result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and BAD_RECIPES[0][1] in lines[0] and str(path) in lines[0], lines
    assert not (tmp_path / "out").exists()  # validated before anything ran or was written


SHIPPED_RECIPES = sorted((Path(__file__).resolve().parents[1] / "recipes").glob("*.toml"))


@pytest.mark.parametrize("path", SHIPPED_RECIPES, ids=[p.stem for p in SHIPPED_RECIPES])
def test_shipped_recipes_load_and_expand(path):
    # The README's commands point at these files: each must validate and expand into jobs whose final
    # energies cover every allowed spin of every complex, parents listed before their children.
    study = load_recipe(path)
    jobs = expand(study)
    assert jobs and len({job.key for job in jobs}) == len(jobs)
    seen = set()
    for job in jobs:
        assert job.parent is None or job.parent in seen
        seen.add(job.key)
    assert {"T-4", "SP-4"} <= {job.spec.arrangement for job in jobs}
    for entry in study.complexes:
        final_spins = {job.spec.spin2s for job in jobs if job.final and job.spec.formula == entry.complex.formula}
        assert final_spins == set(entry.complex.allowed_spin2s)
    if path.stem == "demo":
        assert study.complexes[0].complex.allowed_spin2s == (0, 2)  # d8: 2S = 0, 2 (common practice, no source)


def test_a_run_leaves_the_callers_environment_and_thread_pools_alone(tmp_path):
    """Threads are limited inside each job process (threadpoolctl), never through the caller's environment."""
    from threadpoolctl import threadpool_info

    from fourfold.study.runner import run_study

    study = parse_recipe("level = 'screen'\nrelaxations = ['held']\n[[complex]]\nformula = '[ZnCl4]2-'\n", "zn")
    environment, pools = dict(os.environ), {p["filepath"]: p["num_threads"] for p in threadpool_info()}
    summary = run_study(study, tmp_path / "zn", workers=1, threads=1)
    assert summary.done == summary.total == 2
    assert dict(os.environ) == environment
    after = {p["filepath"]: p["num_threads"] for p in threadpool_info()}
    assert {path: after[path] for path in pools} == pools  # libraries loaded since may be new; none was changed
    logs = sorted(p.name for p in (tmp_path / "zn" / "logs").iterdir())
    assert logs[0].startswith("ZnCl4_2-_SP-4") and "2S0_held_relax-held_xtb" in logs[0], logs
    header = (tmp_path / "zn" / "logs" / logs[0]).read_text().splitlines()[:4]
    assert header[0].startswith("# fourfold job: [ZnCl4]2- SP-4") and header[3].startswith("# job key: ")
