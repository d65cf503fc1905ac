"""One writer per study folder for a whole command, a one-line refusal naming the holder, no stale lock.

The lock is flock(2) on run.lock: the kernel drops it when its holder dies, however it dies (Linux
flock(2) manual page: the lock goes with the last descriptor of the open file — from memory), so a lock
file that still names a dead process blocks nothing. Temporary files carry the writer's PID in their
name, so two processes never write the same temporary file.
"""

from __future__ import annotations

import os
import socket
import subprocess
import sys

import pytest
from faultkit import ZINC_JOBS, check_clean, check_kept, command, fault, one_line, start, stored

HOLD = ("import sys, time; from fourfold.study.runner import RunLock\n"
        "with RunLock(sys.argv[1]):\n    print('held', flush=True)\n    time.sleep(600)\n")


@pytest.fixture()
def holder(zinc_copy):
    """Another process holding the folder's lock (as a running fourfold does)."""
    process = subprocess.Popen([sys.executable, "-c", HOLD, str(zinc_copy)], stdout=subprocess.PIPE, text=True)
    assert process.stdout.readline().strip() == "held"
    yield process
    process.kill()
    process.wait()


@pytest.mark.parametrize("name", ["run", "report", "rebuild"])
def test_a_second_writer_is_refused_in_one_line_naming_the_holder(zinc_copy, holder, name):
    args = {"run": ("run", zinc_copy / "recipe.toml", "--out", zinc_copy, "--quiet"), "report": ("report", zinc_copy),
            "rebuild": ("rebuild", zinc_copy)}[name]
    fault(f"`fourfold {name}` on a folder another process holds")
    result = command(*args, what=f"{name} on a held folder")
    assert result.returncode == 2
    line = one_line(result.stderr)
    assert f"pid {holder.pid} on {socket.gethostname()}" in line and "in use" in line, line
    assert not list(zinc_copy.glob("results.db.before-rebuild-*"))  # the refused rebuild touched nothing


def test_status_reads_while_another_process_writes(zinc_copy, holder):
    result = command("status", zinc_copy, what="status on a held folder")
    assert result.returncode == 0 and f"{ZINC_JOBS} done" in result.stdout


def test_two_runs_on_one_finished_folder_never_race_in_the_report(zinc_copy, zinc_done):
    """Both commands at once: one writes the report, the other is refused in one line; no traceback."""
    recipe = zinc_copy / "recipe.toml"
    fault("two `fourfold run` at once on one finished folder")
    first, second = (start("run", recipe, "--out", zinc_copy, "--quiet") for _ in range(2))
    outputs = [p.communicate(timeout=600) for p in (first, second)]
    for out, err in outputs:
        check_clean(out + err, "two runs at once")
    codes = sorted(p.returncode for p in (first, second))
    if codes == [0, 0]:  # the machine ran them one after the other: still fine, and nothing raced
        pass
    else:
        assert codes == [0, 2], outputs
        loser = outputs[[first, second].index(next(p for p in (first, second) if p.returncode == 2))]
        assert "in use by a running fourfold" in one_line(loser[1])
    assert not [p for p in zinc_copy.rglob("*") if ".partial" in p.name or p.name.endswith(".new")]
    check_kept(stored(zinc_done), stored(zinc_copy), "two runs at once")


@pytest.mark.parametrize("content", ["pid 999999 on " + socket.gethostname(), "", "\x00\xff garbage"])
def test_a_lock_file_left_by_a_dead_process_blocks_nothing(zinc_copy, content):
    (zinc_copy / "run.lock").write_bytes(content.encode("utf-8", "surrogateescape"))
    fault(f"a stale run.lock ({content[:20]!r})")
    result = command("rebuild", zinc_copy, what="rebuild with a stale lock file")
    assert result.returncode == 0, result.stderr
    assert (zinc_copy / "run.lock").read_text() == f"pid {os.getpid()} on {socket.gethostname()}"


def test_a_run_lock_that_cannot_be_opened_is_one_line(zinc_copy):
    (zinc_copy / "run.lock").mkdir()  # something else took the name
    fault("run.lock is a folder")
    result = command("report", zinc_copy, what="report with run.lock a folder")
    assert result.returncode == 1 and "cannot lock" in one_line(result.stderr)


WRITE_MANY = ("import sys; from pathlib import Path; from fourfold.study.records import write_text_atomic\n"
              "for i in range(300):\n    write_text_atomic(Path(sys.argv[1]), sys.argv[2] * 5000)\n")


def test_two_processes_writing_one_file_never_share_a_temporary_name(tmp_path):
    target = tmp_path / "shared.txt"
    fault("two processes writing the same file at once")
    writers = [subprocess.Popen([sys.executable, "-c", WRITE_MANY, str(target), letter], stderr=subprocess.PIPE,
                                text=True) for letter in "ab"]
    errors = [w.communicate(timeout=300)[1] for w in writers]
    for error in errors:
        check_clean(error, "two writers of one file")
    assert [w.returncode for w in writers] == [0, 0], errors
    assert target.read_text() in ("a" * 5000, "b" * 5000)  # whole, from one writer
    assert [p.name for p in tmp_path.iterdir()] == ["shared.txt"]
