"""SIGINT, SIGTERM and SIGHUP in every phase of a command: it stops, its job processes and the fork server
die with it, the store stays consistent, and one line says how to go on.

The signal goes to the command's whole process group, as a terminal's Ctrl-C or hang-up does. The exit
status is 128 + the signal number: 130, 143, 129 (POSIX, Shell Command Language, "Exit Status for
Commands"; the shells' convention for a process ended by a signal — from memory).
"""

from __future__ import annotations

import json
import shutil
import signal

import pytest
from faultkit import ZINC_JOBS, ZINC_SP4, Watched, command, fault, fourfold, recipe_file, stored, wait_until

SIGNALS = {"SIGINT": (signal.SIGINT, 130), "SIGTERM": (signal.SIGTERM, 143), "SIGHUP": (signal.SIGHUP, 129)}
PHASES = ("validation", "start-up", "running", "reporting")
# Each phase once with each signal would be 12 real runs; by default every phase and every signal is met
# (the diagonal below), the rest runs with -m slow.
DEFAULT = {("validation", "SIGINT"), ("validation", "SIGTERM"), ("validation", "SIGHUP"), ("start-up", "SIGINT"),
           ("running", "SIGINT"), ("running", "SIGTERM"), ("running", "SIGHUP"), ("reporting", "SIGTERM")}
CASES = [pytest.param(phase, name, marks=() if (phase, name) in DEFAULT else pytest.mark.slow)
         for phase in PHASES for name in SIGNALS]


def _running_labels(folder) -> list:
    try:
        return json.loads((folder / "running.json").read_text())["running"]
    except (OSError, ValueError, KeyError):
        return []


def _consistent(folder) -> dict:
    """The store and the records agree, and no job is recorded failed (a signal is not a job's failure)."""
    from fourfold.study.records import RecordShelf

    rows = stored(folder) if (folder / "results.db").exists() else {}
    records, unreadable = RecordShelf(folder).read()
    assert not unreadable
    assert {r.job.key: r.result["status"] for r in records} == rows
    assert "failed" not in rows.values(), rows
    return rows


@pytest.mark.parametrize("phase,name", CASES)
def test_a_signal_stops_every_phase_cleanly(zinc_done, tmp_path, phase, name):
    number, status = SIGNALS[name]
    if phase == "reporting":  # a finished folder runs no job: the command goes straight to its report
        folder = tmp_path / "study"
        shutil.copytree(zinc_done, folder)
        for written in ("tables", "figures", "structures"):
            shutil.rmtree(folder / written)
        recipe = folder / "recipe.toml"
    else:
        folder, recipe = tmp_path / "study", recipe_file(tmp_path)
    # the SP-4 job hangs, so the run is surely still running when the signal comes
    run = Watched("run", recipe, "--out", folder, "--quiet", extra_env={"FOURFOLD_FAULT": f"hang:{ZINC_SP4}"})
    ready = {"validation": run.handlers_installed,
             "start-up": lambda: run.said("Safety"),  # cautions print once the folder is ready, before any job
             "running": lambda: any(ZINC_SP4 in label for label in _running_labels(folder)),
             "reporting": lambda: (folder / "tables" / "report.json").exists()}[phase]
    try:
        wait_until(ready, 300, f"the {phase} phase", run.process)
        run.signal_group(number)
        fault(f"{name} in the {phase} phase")
        out, err = run.finish()
    finally:
        survivors = run.left_alive()
        if run.process.poll() is None:
            run.process.kill()
    from faultkit import check_clean

    check_clean(out + err, f"{name} in the {phase} phase")
    assert run.process.returncode == status, err
    line = err.strip().splitlines()[-1]
    assert line.startswith(f"stopped by {name}"), err
    assert not survivors, [p.pid for p in survivors]  # no orphan: neither the fork server nor a job
    if phase == "validation":
        assert "before anything was written" in line and not folder.exists()
        return
    if phase == "reporting":
        assert f"fourfold report {folder}" in line
        assert not [p for p in folder.rglob("*") if ".partial" in p.name]
    else:
        assert "rerun the same command to resume" in line
    rows = _consistent(folder)
    if phase == "start-up":
        assert not rows  # no job had started


@pytest.mark.slow
def test_a_run_stopped_mid_job_resumes_and_finishes(tmp_path):
    folder, recipe = tmp_path / "study", recipe_file(tmp_path)
    run = Watched("run", recipe, "--out", folder, "--quiet", extra_env={"FOURFOLD_FAULT": f"hang:{ZINC_SP4}"})
    try:
        wait_until(lambda: any(ZINC_SP4 in label for label in _running_labels(folder)), 300, "a running job",
                   run.process)
        run.signal_group(signal.SIGINT)
        fault("Ctrl-C while a job runs, then resume")
        run.finish()
    finally:
        run.left_alive()
    before = _consistent(folder)
    rerun = fourfold("run", recipe, "--out", folder, "--quiet", what="resume after Ctrl-C")
    assert rerun.returncode == 0, rerun.stderr
    assert f"{ZINC_JOBS - len(before)} run now" in rerun.stdout
    status = json.loads(command("status", folder, "--json", what="status after resume").stdout)
    assert (status["done"], status["failed"]) == (ZINC_JOBS, 0)


def test_a_driver_started_with_sigint_ignored_still_stops_on_it(tmp_path):
    """A shell starts a script's background jobs (`fourfold run … &`) with SIGINT ignored, and Python keeps it
    ignored (POSIX, Shell Command Language, "Asynchronous Lists"; from memory): such a run used to finish
    through a Ctrl-C or `kill -INT`. fourfold installs its own handler whatever it inherited."""
    import subprocess
    import sys

    from faultkit import env

    folder, recipe = tmp_path / "study", recipe_file(tmp_path)
    code = ("import signal, runpy, sys; signal.signal(signal.SIGINT, signal.SIG_IGN); "
            "sys.argv = ['fourfold'] + sys.argv[1:]; runpy.run_module('fourfold.cli', run_name='__main__')")
    process = subprocess.Popen([sys.executable, "-c", code, "run", str(recipe), "--out", str(folder), "--quiet"],
                               stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, start_new_session=True,
                               env=env(FOURFOLD_FAULT=f"hang:{ZINC_SP4}"))
    try:
        wait_until(lambda: any(ZINC_SP4 in label for label in _running_labels(folder)), 300, "a running job", process)
        process.send_signal(signal.SIGINT)  # to the driver alone
        fault("SIGINT to a driver that inherited SIGINT ignored")
        out, err = process.communicate(timeout=120)
    finally:
        if process.poll() is None:
            process.kill()
    assert process.returncode == 130 and "stopped by SIGINT" in err, err
