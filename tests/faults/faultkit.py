"""What every fault test shares: the command line as a real process, a tiny study, and the ledger.

The ledger counts what the catalogue did, for `benchmarks/faults.py`: faults injected, bad inputs tried,
tracebacks seen and finished results lost. A test adds to it *before* it asserts, so a failing test still
counts what it saw. It is a JSON-lines file named by FOURFOLD_FAULT_LEDGER; without it nothing is written.

Real runs use the smallest study there is: [ZnCl4]2- (d10, one spin state) at the screen level, held
relaxations, so a job takes about a second of GFN2-xTB.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

LEDGER_ENV = "FOURFOLD_FAULT_LEDGER"
# Generated inputs per property-based test: the benchmark raises it (FOURFOLD_FAULT_EXAMPLES=…).
EXAMPLES = int(os.environ.get("FOURFOLD_FAULT_EXAMPLES", "150"))

ZINC = """
title = "faults"
level = "screen"
relaxations = ["held"]
[run]
max_steps = 30

[[complex]]
formula = "[ZnCl4]2-"
"""
ZINC_JOBS = 2  # T-4 and SP-4, 2S = 0 (d10: one spin state; common practice, no source)
ZINC_T4 = "[ZnCl4]2- T-4"  # a label fragment for FOURFOLD_FAULT
ZINC_SP4 = "[ZnCl4]2- SP-4"


def note(kind: str, count: int = 1, what: str = "") -> None:
    """Add ``count`` to the ledger's ``kind``: fault, bad_input, traceback, lost."""
    path = os.environ.get(LEDGER_ENV)
    if path and count:
        with open(path, "a", encoding="utf-8") as ledger:
            ledger.write(json.dumps({"kind": kind, "count": count, "what": what}) + "\n")


def fault(what: str) -> None:
    note("fault", 1, what)


def check_clean(output: str, what: str) -> None:
    """No Python traceback in a command's output (counted, then asserted)."""
    if "Traceback (most recent call last)" in output:
        note("traceback", 1, what)
    assert "Traceback" not in output, f"{what}:\n{output}"


def check_kept(before: dict, after: dict, what: str) -> None:
    """Every result finished before the fault (key -> status) is still there with the same status."""
    lost = [key for key, status in before.items() if after.get(key) != status]
    note("lost", len(lost), what)
    assert not lost, f"{what}: lost {len(lost)} finished results"


def one_line(stderr: str) -> str:
    lines = [line for line in stderr.strip().splitlines() if line.strip()]
    assert len(lines) == 1, stderr
    return lines[0]


def env(**extra) -> dict:
    return {**os.environ, "OMP_NUM_THREADS": "1", **extra}


def fourfold(*args, what: str, extra_env=None, timeout=600, **kwargs) -> subprocess.CompletedProcess:
    """`fourfold ARGS…` to its end in a process of its own; its output is checked for tracebacks."""
    result = subprocess.run([sys.executable, "-m", "fourfold.cli", *map(str, args)], capture_output=True, text=True,
                            env=env(**(extra_env or {})), timeout=timeout, **kwargs)
    check_clean(result.stdout + result.stderr, what)
    return result


def command(*args, what: str) -> subprocess.CompletedProcess:
    """`fourfold ARGS…` run inside this process (click's test runner): the same code path as the real
    command without the interpreter's start-up, for commands that start no job. Any exception other than
    the command's own exit counts as a traceback."""
    import traceback

    from click.testing import CliRunner

    from fourfold.cli import main
    from fourfold.study.stopping import STOP_SIGNALS

    handlers = {number: signal.getsignal(number) for number in STOP_SIGNALS}
    try:
        result = CliRunner().invoke(main, [str(a) for a in args])
    finally:
        for number, handler in handlers.items():  # the command installs its own; pytest's come back
            signal.signal(number, handler)
    crash = ""
    if result.exception is not None and not isinstance(result.exception, SystemExit):
        crash = "".join(traceback.format_exception(result.exception))
    check_clean(result.stdout + result.stderr + crash, what)
    return subprocess.CompletedProcess(args, result.exit_code, result.stdout, result.stderr)


def start(*args, extra_env=None, **kwargs) -> subprocess.Popen:
    """`fourfold ARGS…` started in a session of its own (so the test can signal its whole process group)."""
    return subprocess.Popen([sys.executable, "-m", "fourfold.cli", *map(str, args)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=env(**(extra_env or {})), start_new_session=True,
                            **kwargs)


class Watched:
    """A command started with ``start``, watched while it runs: its stderr lines as they come and every
    process that ever ran under it (the fork server, the job processes)."""

    def __init__(self, *args, extra_env=None):
        import threading

        self.process = start(*args, extra_env=extra_env)
        self.started = time.monotonic()
        self.stderr_lines: list[str] = []
        self.seen: dict = {}
        self._readers = [threading.Thread(target=self._read, daemon=True),
                         threading.Thread(target=self._watch, daemon=True)]
        for thread in self._readers:
            thread.start()

    def _read(self) -> None:
        for line in self.process.stderr:
            self.stderr_lines.append(line)

    def _watch(self) -> None:
        while self.process.poll() is None:
            for child in descendants(self.process.pid):
                self.seen.setdefault(child.pid, child)
            time.sleep(0.02)

    def said(self, text: str) -> bool:
        return any(text in line for line in self.stderr_lines)

    def handlers_installed(self) -> bool:
        """Whether the command catches SIGTERM and SIGHUP yet (/proc/PID/status, SigCgt: a bit per signal)."""
        try:
            with open(f"/proc/{self.process.pid}/status", encoding="ascii") as status:
                caught = int(next(line.split()[1] for line in status if line.startswith("SigCgt:")), 16)
        except (OSError, StopIteration):
            return False
        return all(caught >> (number - 1) & 1 for number in (signal.SIGTERM, signal.SIGHUP))

    def signal_group(self, number: int) -> None:
        """``number`` to the command's whole process group, as a terminal sends Ctrl-C or a hang-up."""
        self.signalled = time.monotonic()
        os.killpg(self.process.pid, number)

    def finish(self, timeout_s: float = 300) -> tuple[str, str]:
        """Wait for the end; returns (stdout, stderr) and notes how long it took after the signal."""
        out = self.process.stdout.read()
        self.process.wait(timeout=timeout_s)
        for thread in self._readers:
            thread.join(timeout=10)
        if hasattr(self, "signalled"):
            note("stop_seconds", round(time.monotonic() - self.signalled, 3))
        return out, "".join(self.stderr_lines)

    def left_alive(self) -> list:
        """Processes that ran under the command and still live, once the stragglers had time to die."""
        deadline = time.monotonic() + 30
        while alive(self.seen.values()) and time.monotonic() < deadline:
            time.sleep(0.1)
        survivors = alive(self.seen.values())
        for process in survivors:  # do not leave them to the next test
            process.kill()
        return survivors


def wait_until(condition, timeout_s: float, what: str, process: subprocess.Popen | None = None) -> None:
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        if condition():
            return
        if process is not None and process.poll() is not None:
            out, err = process.communicate()
            raise AssertionError(f"the command ended (status {process.returncode}) before {what}:\n{out}\n{err}")
        time.sleep(0.05)
    raise AssertionError(f"timed out waiting for {what}")


def descendants(pid: int) -> list:
    """The live processes under ``pid`` (the fork server and the job processes of a run)."""
    import psutil

    try:
        return psutil.Process(pid).children(recursive=True)
    except psutil.NoSuchProcess:
        return []


def alive(processes) -> list:
    import psutil

    found = []
    for process in processes:
        try:
            if process.is_running() and process.status() != psutil.STATUS_ZOMBIE:
                found.append(process)
        except psutil.NoSuchProcess:
            pass
    return found


def kill_group(process: subprocess.Popen) -> None:
    try:
        os.killpg(process.pid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    process.wait()


def stored(folder: Path) -> dict:
    """job key -> status in a folder's results.db."""
    from fourfold.study.store import ResultStore

    return ResultStore(Path(folder) / "results.db", create=False).status()


def recipe_file(folder: Path, text: str = ZINC, name: str = "study.toml") -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / name
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture(scope="session")
def zinc_done(tmp_path_factory) -> Path:
    """A finished [ZnCl4]2- study folder (run once, by the command line); copy it before changing it."""
    base = tmp_path_factory.mktemp("zinc")
    recipe = recipe_file(base)
    result = fourfold("run", recipe, "--out", base / "done", "--quiet", what="the reference run")
    assert result.returncode == 0, result.stderr
    assert len(stored(base / "done")) == ZINC_JOBS
    return base / "done"


@pytest.fixture()
def zinc_copy(zinc_done, tmp_path) -> Path:
    """A copy of the finished study folder to break."""
    copy = tmp_path / "copy"
    shutil.copytree(zinc_done, copy, ignore=shutil.ignore_patterns("run.lock"))
    return copy
