"""The machine runs short: a full disk, a job out of memory or out of time, a job killed from outside, a
study folder that cannot be written. Each is one line or a recorded failed job, never a traceback, never a
damaged store.

The full disk is a small tmpfs mounted for the test (root only; skipped otherwise). The read-only folder
is met as an ordinary user meets it: the command runs without the capabilities that let root write
anywhere (CAP_DAC_OVERRIDE, CAP_DAC_READ_SEARCH, CAP_FOWNER; capabilities(7) — from memory), or, for a
read-only file system, on a read-only bind mount.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess

import pytest
from faultkit import (
    ZINC_JOBS,
    ZINC_SP4,
    ZINC_T4,
    Watched,
    check_kept,
    command,
    descendants,
    fault,
    fourfold,
    one_line,
    recipe_file,
    stored,
    wait_until,
)


def _mount(*args) -> bool:
    return subprocess.run(["mount", *args], capture_output=True).returncode == 0


@pytest.fixture()
def small_disk(tmp_path):
    """``small_disk(kilobytes)``: a folder on a tmpfs of that size, unmounted afterwards."""
    mounted = []

    def make(kilobytes: int):
        point = tmp_path / f"disk{len(mounted)}"
        point.mkdir()
        if os.geteuid() != 0 or not _mount("-t", "tmpfs", "-o", f"size={kilobytes}k", "tmpfs", str(point)):
            pytest.skip("mounting a small tmpfs needs root (mount -t tmpfs); a full disk cannot be made here")
        mounted.append(point)
        return point

    yield make
    for point in mounted:
        subprocess.run(["umount", "-l", str(point)], capture_output=True)


def _fill(folder) -> None:
    """Fill the file system of ``folder`` to the last byte."""
    with open(folder / "filler", "wb", buffering=0) as filler:
        try:
            while True:
                filler.write(b"\0" * 4096)
        except OSError:
            pass


def _records(folder) -> dict:
    from fourfold.study.records import RecordShelf

    records, _ = RecordShelf(folder).read()
    return {r.job.key: r.result["status"] for r in records}


def _leftovers(folder) -> list:
    return [p.name for p in folder.rglob("*") if ".partial" in p.name or p.name.endswith((".new", ".rebuild"))]


# ------------------------------------------------------------------------------------------------ full disk

def test_a_disk_too_small_for_the_store_is_one_line(small_disk, tmp_path):
    disk = small_disk(32)  # room for the recipe, not for an empty results.db (68 kB)
    fault("disk full before the store exists")
    result = fourfold("run", recipe_file(tmp_path), "--out", disk / "study", "--quiet", what="run on a 32 kB disk")
    assert result.returncode == 1
    line = one_line(result.stderr[result.stderr.index("error:"):])
    assert "full" in line or "No space left" in line, line
    assert not _leftovers(disk)


def test_a_disk_that_fills_in_the_report_keeps_every_result(small_disk, tmp_path):
    disk = small_disk(320)  # room for the store, the records and the tables, not for the figures
    folder = disk / "study"
    fault("disk full while writing the report")
    result = fourfold("run", recipe_file(tmp_path), "--out", folder, "--quiet", what="run whose report fills the disk")
    assert result.returncode == 1, result.stderr
    line = one_line(result.stderr[result.stderr.index("error:"):])
    assert "No space left on device" in line and "free some space" in line, line
    assert len(stored(folder)) == ZINC_JOBS
    check_kept(_records(folder), stored(folder), "disk full in the report")
    assert not _leftovers(folder)


@pytest.mark.slow
def test_a_disk_that_fills_mid_run_keeps_what_finished_and_resumes(small_disk, tmp_path):
    disk = small_disk(4096)
    folder, recipe = disk / "study", recipe_file(tmp_path)
    run = Watched("run", recipe, "--out", folder, "--quiet", "--timeout", "4",
                  extra_env={"FOURFOLD_FAULT": f"hang:{ZINC_SP4}"})
    try:
        wait_until(lambda: ZINC_SP4 in (folder / "running.json").read_text() if (folder / "running.json").exists()
                   else False, 300, "a running job", run.process)
        before = _records(folder)
        _fill(folder)  # the hanging job times out on a full disk: its failure cannot be kept
        fault("disk fills while jobs run")
        out, err = run.finish()
    finally:
        run.left_alive()
    from faultkit import check_clean

    check_clean(out + err, "disk full mid-run")
    assert run.process.returncode == 1 and "No space left on device" in err, err
    (folder / "filler").unlink()
    rerun = fourfold("run", recipe, "--out", folder, "--quiet", what="run after space came back")
    assert rerun.returncode == 0, rerun.stderr
    check_kept(before, stored(folder), "disk full mid-run, then resumed")
    assert len(stored(folder)) == ZINC_JOBS


def test_report_and_rebuild_on_a_full_disk_change_nothing(small_disk, zinc_done):
    disk = small_disk(2048)
    folder = disk / "study"
    shutil.copytree(zinc_done, folder)
    shutil.rmtree(folder / "figures")
    original = (folder / "results.db").read_bytes()
    _fill(folder)
    fault("`fourfold report` on a full disk")
    report = command("report", folder, what="report on a full disk")
    assert report.returncode == 1 and "No space left on device" in one_line(report.stderr)
    fault("`fourfold rebuild` on a full disk")
    rebuild = command("rebuild", folder, what="rebuild on a full disk")
    assert rebuild.returncode == 1 and one_line(rebuild.stderr)
    assert (folder / "results.db").read_bytes() == original  # not renamed, not touched
    assert not _leftovers(folder)
    status = command("status", folder, "--json", what="status on a full disk")
    assert json.loads(status.stdout)["done"] == ZINC_JOBS


# ------------------------------------------------------------------------------ memory, time, killed jobs

def test_out_of_memory_and_out_of_time_are_recorded_failures(tmp_path):
    folder = tmp_path / "study"
    fault("a job out of memory (address space capped)")
    fault("a job over its time limit")
    result = fourfold("run", recipe_file(tmp_path), "--out", folder, "--quiet", "--timeout", "4",
                      what="out of memory and out of time",
                      extra_env={"FOURFOLD_FAULT": f"memory:{ZINC_T4},hang:{ZINC_SP4}"})
    assert result.returncode == 0, result.stderr
    status = json.loads(command("status", folder, "--json", what="status after oom and timeout").stdout)
    reasons = {f["label"].split()[1]: f["reason"] for f in status["failures"]}
    assert status["failed"] == ZINC_JOBS and set(reasons) == {"T-4", "SP-4"}
    # the memory-starved job says why: MemoryError in Python, or the numerical library's own last words
    assert "MemoryError" in reasons["T-4"] or "its log ends:" in reasons["T-4"], reasons["T-4"]
    assert reasons["SP-4"] == "timeout after 4 s"
    check_kept(_records(folder), stored(folder), "failures recorded")


def test_a_job_killed_from_outside_is_a_recorded_failure(tmp_path):
    """As the kernel's OOM killer or an administrator would: SIGKILL to the job's process alone."""
    import psutil

    folder = tmp_path / "study"
    run = Watched("run", recipe_file(tmp_path), "--out", folder, "--quiet",
                  extra_env={"FOURFOLD_FAULT": f"hang:{ZINC_SP4}"})

    def hanging_job():
        jobs = [p for p in descendants(run.process.pid) if "forkserver" in " ".join(p.parent().cmdline())]
        return jobs[0] if len(jobs) == 1 and len(_records(folder)) == 1 else None

    try:
        wait_until(hanging_job, 300, "the other job to finish", run.process)
        hanging_job().send_signal(signal.SIGKILL)
        fault("SIGKILL to one job process")
        out, err = run.finish()
    except psutil.NoSuchProcess:
        raise AssertionError("the job ended before it could be killed") from None
    finally:
        run.left_alive()
    assert run.process.returncode == 0, err
    status = json.loads(command("status", folder, "--json", what="status after a killed job").stdout)
    assert status["failed"] == 1 and "worker died from SIGKILL" in status["failures"][0]["reason"]


# ------------------------------------------------------------------------------------------ read-only folder

def _unprivileged(*args, what):
    """`fourfold ARGS…` as root without the capabilities that bypass file permissions (as an ordinary user)."""
    if os.geteuid() != 0:
        return fourfold(*args, what=what)
    if not shutil.which("setpriv"):
        pytest.skip("setpriv (util-linux) is missing: cannot drop root's file capabilities")
    import sys

    from faultkit import check_clean, env

    result = subprocess.run(["setpriv", "--bounding-set", "-dac_override,-dac_read_search,-fowner", "--",
                             sys.executable, "-m", "fourfold.cli", *map(str, args)], capture_output=True, text=True,
                            env=env(), timeout=600)
    check_clean(result.stdout + result.stderr, what)
    return result


def _read_only(folder) -> None:
    for path in [folder, *folder.rglob("*")]:
        path.chmod(0o555 if path.is_dir() else 0o444)


@pytest.mark.parametrize("name", ["run", "report", "rebuild", "run into"])
def test_a_read_only_study_folder_is_one_line_and_untouched(zinc_copy, tmp_path, name):
    _read_only(zinc_copy)
    before = {p: p.stat().st_mtime_ns for p in zinc_copy.rglob("*")}
    args = {"run": ("run", zinc_copy / "recipe.toml", "--out", zinc_copy, "--quiet"), "report": ("report", zinc_copy),
            "rebuild": ("rebuild", zinc_copy),
            "run into": ("run", zinc_copy / "recipe.toml", "--out", zinc_copy / "new", "--quiet")}[name]
    fault(f"`fourfold {name}` a read-only folder (permissions)")
    try:
        result = _unprivileged(*args, what=f"{name} on a read-only folder")
        reader = _unprivileged("status", zinc_copy, what="status on a read-only folder")
    finally:
        for path in [zinc_copy, *zinc_copy.rglob("*")]:
            path.chmod(0o755 if path.is_dir() else 0o644)
    assert result.returncode == 1, result.stderr
    assert "Permission denied" in one_line(result.stderr)
    assert reader.returncode == 0 and f"{ZINC_JOBS} done" in reader.stdout, reader.stderr
    assert {p: p.stat().st_mtime_ns for p in zinc_copy.rglob("*")} == before


def test_a_read_only_file_system_is_one_line(zinc_copy, zinc_done):
    if os.geteuid() != 0 or not _mount("--bind", str(zinc_copy), str(zinc_copy)):
        pytest.skip("a read-only bind mount needs root")
    try:
        if not _mount("-o", "remount,ro,bind", str(zinc_copy)):
            pytest.skip("this kernel refused to make the bind mount read-only")
        outcomes = {}
        for name, args in {"run": ("run", zinc_copy / "recipe.toml", "--out", zinc_copy, "--quiet"),
                           "report": ("report", zinc_copy), "rebuild": ("rebuild", zinc_copy)}.items():
            fault(f"`fourfold {name}` on a read-only file system")
            outcomes[name] = (fourfold if name == "run" else command)(*args, what=f"{name} on a read-only fs")
        status = command("status", zinc_copy, "--json", what="status on a read-only file system")
    finally:
        subprocess.run(["umount", "-l", str(zinc_copy)], capture_output=True)
    for name, result in outcomes.items():
        assert result.returncode == 1, (name, result.stderr)
        assert "read-only" in one_line(result.stderr), (name, result.stderr)
    assert json.loads(status.stdout)["done"] == ZINC_JOBS
    check_kept(stored(zinc_done), stored(zinc_copy), "read-only file system")
