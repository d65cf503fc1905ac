"""Run a study's jobs: a local pool of worker processes, one process per job, the driver the only writer.

Each job runs in a process of its own (forked from a clean fork server), so a crash of one job — an
exception, a segfault, the OOM killer, a timeout — is recorded as a failure with its reason and the others
go on. Finished jobs are in the store the moment they end, each with its record beside it (fourfold.study.records);
a rerun skips every key already done (and every failed one unless asked to retry), so a killed batch resumes
where it stopped. Job processes die with the driver, however it ends (fourfold.study.process.die_with_parent).
"""

from __future__ import annotations

import fcntl
import json
import os
import signal
import socket
import time
from dataclasses import dataclass, field
from functools import cache
from multiprocessing import connection, get_context
from pathlib import Path
from types import SimpleNamespace

from ..errors import InputError, describe_os_error
from .jobs import Job, code_versions, expand
from .process import complete_failure, exit_reason, failed_result, job_paths, local_job_main
from .records import RecordShelf, write_text_atomic
from .stopping import blocked, deferred, stop_pending
from .store import ResultStore, StoreError, store_records

DEFAULT_TIMEOUT_S = 3600.0
_POLL_S = 0.2
_JOIN_S = 5.0  # a killed job process is gone well within this


@dataclass
class RunSummary:
    total: int
    done: int = 0
    failed: int = 0
    skipped: int = 0  # already in the store before this run
    ran: int = 0
    failures: list = field(default_factory=list)
    wall_seconds: float = 0.0
    job_seconds: float = 0.0  # the run jobs' own wall times, summed: makespan × workers at best
    workers: int = 1


class RunLock:
    """An exclusive lock on an output folder, held by an open file: the kernel drops it when the holder
    dies, so a killed run never blocks the next one. Re-entrant within one process, so a command can hold
    it over running and reporting while run_study takes it again inside."""

    _held: dict[Path, int] = {}  # folder -> nesting depth in this process

    def __init__(self, folder: Path):
        self.folder = Path(folder).resolve()
        self.path = self.folder / "run.lock"
        self._handle = None

    def __enter__(self):
        if self.folder in RunLock._held:
            RunLock._held[self.folder] += 1
            return self
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            self._handle = open(self.path, "a+")
        except OSError as error:
            raise StoreError(f"cannot lock {self.folder} for writing ({describe_os_error(error)})") from None
        try:
            fcntl.flock(self._handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            self._handle.seek(0)
            holder = self._handle.read().strip() or "another process"
            self._handle.close()
            raise InputError(f"{self.path.parent} is in use by a running fourfold ({holder}); wait for it to finish "
                             "or choose another --out folder") from None
        self._handle.seek(0)
        self._handle.truncate()
        self._handle.write(f"pid {os.getpid()} on {socket.gethostname()}")
        self._handle.flush()
        RunLock._held[self.folder] = 1
        return self

    @staticmethod
    def held_elsewhere(folder) -> bool:
        """Whether another process holds the lock of ``folder`` now (a run is on there)."""
        path = Path(folder) / "run.lock"
        if not path.exists() or Path(folder).resolve() in RunLock._held:
            return False
        try:
            handle = open(path)
        except OSError:  # unreadable, or not a file: no run of ours holds it
            return False
        with handle:
            try:
                fcntl.flock(handle, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except BlockingIOError:
                return True
            fcntl.flock(handle, fcntl.LOCK_UN)
            return False

    def __exit__(self, *exc):
        RunLock._held[self.folder] -= 1
        if RunLock._held[self.folder]:
            return
        del RunLock._held[self.folder]
        fcntl.flock(self._handle, fcntl.LOCK_UN)
        self._handle.close()


class _Running:
    def __init__(self, job, process, conn, started, parent):
        self.job, self.process, self.conn, self.started, self.parent = job, process, conn, started, parent


def write_provenance(out_dir: Path, study) -> None:
    """The folder's record of what ran: the Study written back as TOML (levels in full), and the versions."""
    from .recipe import study_to_toml

    write_text_atomic(out_dir / "recipe.toml", study_to_toml(study))
    write_text_atomic(out_dir / "versions.json", json.dumps(code_versions(), indent=2) + "\n")


def run_study(study, out_dir, workers: int = 2, threads: int = 1, retry_failed: bool = False,
              timeout_s: float | None = None, progress=None, store_url: str | None = None,
              pool_factory=None, on_start=None) -> RunSummary:
    """Run every job of ``study`` not yet done in ``out_dir``'s store; returns counts and failures.

    ``progress`` is an optional callable(summary, running_labels) called as jobs finish.
    ``pool_factory(out_dir, timeout_s)`` makes the executor (default: a LocalPool of ``workers``).
    ``on_start()`` is called once the folder, the store and the executor are ready, before any job runs.
    """
    out_dir = Path(out_dir)
    timeout_s = float(timeout_s or study.run.get("timeout_s", DEFAULT_TIMEOUT_S))
    if workers < 1 or threads < 1:
        raise InputError("--workers and --threads must be at least 1")
    started = time.perf_counter()
    with RunLock(out_dir):
        try:
            write_provenance(out_dir, study)
            (out_dir / "logs").mkdir(exist_ok=True)
            (out_dir / "scratch").mkdir(exist_ok=True)
        except OSError as error:
            raise StoreError(f"cannot write the study folder ({describe_os_error(error)})") from None
        store = ResultStore(store_url or out_dir / "results.db")
        shelf = RecordShelf(out_dir)
        jobs = expand(study)
        stored = store.status()
        store_records(store, shelf, stored, {j.key for j in jobs})  # rows a stopped run had not stored yet
        if retry_failed:
            again = [j.key for j in jobs if stored.get(j.key) == "failed"]
            shelf.remove(again)
            store.remove(again)
            for key in again:
                stored.pop(key)
        summary = RunSummary(total=len(jobs))
        summary.skipped = sum(1 for j in jobs if j.key in stored)
        summary.done = sum(1 for j in jobs if stored.get(j.key) == "done")
        summary.failed = sum(1 for j in jobs if stored.get(j.key) == "failed")
        pending = [j for j in jobs if j.key not in stored]
        pool = (pool_factory(out_dir, timeout_s) if pool_factory
                else LocalPool(workers, threads, out_dir, timeout_s))
        summary.workers = workers if pool_factory is None else max(1, pool.free_slots())
        if on_start:
            on_start()
        _drive(pending, stored, store, shelf, pool, summary, progress, _RunningFile(out_dir, summary.workers))
    summary.wall_seconds = time.perf_counter() - started
    return summary


# Imported once in the fork server so each job process starts with them loaded: about 1.5 CPU-s per job
# otherwise (measured: pyscf.dft 0.6 s, dftd3 0.6 s, geomeTRIC 0.6 s, overlapping). Only imports, no
# OpenMP region runs in the server, so the forked jobs still start their own thread pools. A module that
# is missing (an optional extra) is skipped by the fork server and imported, or not, by the job itself.
JOB_MODULES = (
    "numpy", "fourfold.compute.tasks", "fourfold.compute.pyscf_engine", "fourfold.compute.relax",
    "fourfold.compute.xtb_engine", "fourfold.compute.dblock", "fourfold.field.fit", "fourfold.geometry.builder",
    "fourfold.geometry.shape", "pyscf.dft", "pyscf.df", "pyscf.scf.stability", "pyscf.grad", "dftd3.pyscf",
    "geometric.optimize", "tblite.interface",
)


class LocalPool:
    """Up to ``workers`` jobs side by side, each in a process forked from a clean fork server.

    The pool interface (``free_slots``, ``submit``, ``collect``, ``running_labels``, ``close``) is what
    the driver loop needs; fourfold.study.cluster implements it on Dask."""

    def __init__(self, workers: int, threads: int, out_dir: Path, timeout_s: float):
        # Each job limits its own BLAS/OpenMP threads (job_process_body): the caller's environment is left alone.
        self._context = get_context("forkserver")
        self._context.set_forkserver_preload(list(JOB_MODULES))
        self._server_started = False
        self.workers, self.threads, self.out_dir, self.timeout_s = workers, threads, out_dir, timeout_s
        self._running: list[_Running] = []

    def free_slots(self) -> int:
        return self.workers - len(self._running)

    def running_labels(self) -> list[str]:
        return [r.job.label for r in self._running]

    def submit(self, job: Job, parent: dict | None) -> None:
        if not self._server_started:
            from multiprocessing import forkserver, resource_tracker

            resource_tracker.ensure_running()  # first: starting it unblocks SIGINT and SIGTERM in this process
            with blocked():  # the server starts with the stop signals blocked: they are the driver's (stopping.py)
                forkserver.ensure_running()
            self._server_started = True
        receive, send = self._context.Pipe(duplex=False)
        log_path, chk_path = job_paths(self.out_dir, job)
        process = self._context.Process(target=local_job_main, daemon=True,
                                        args=(job, parent, log_path, chk_path, self.threads, send))
        process.start()
        send.close()
        self._running.append(_Running(job, process, receive, time.monotonic(), parent))

    def collect(self, wait_s: float) -> list[tuple[Job, dict]]:
        """Jobs that ended (result, crash or timeout) within ``wait_s`` seconds, with their results."""
        if not self._running:
            return []
        connection.wait([r.conn for r in self._running] + [r.process.sentinel for r in self._running], timeout=wait_s)
        ended = []
        for item in list(self._running):
            result = None
            if item.conn.poll():
                try:
                    result = item.conn.recv()
                except EOFError:
                    result = None
            if result is None and item.process.is_alive():
                if time.monotonic() - item.started <= self.timeout_s:
                    continue
                item.process.kill()
                item.process.join()
                result = {"status": "failed", "reason": f"timeout after {self.timeout_s:.0f} s"}
            item.process.join(timeout=5)
            if result is None and item.process.exitcode == -signal.SIGTERM and stop_pending():
                # SIGTERM sent to the whole process group: the job was stopped with the driver, it did not
                # fail; it stays unrecorded and runs again on resume
                item.conn.close()
                self._running.remove(item)
                continue
            if result is None:
                log_path = job_paths(self.out_dir, item.job)[0]
                result = {"status": "failed", "reason": exit_reason(item.process.exitcode, log_path)}
            item.conn.close()
            self._running.remove(item)
            ended.append((item.job, complete_failure(item.job, result, item.parent)))
        return ended

    def close(self) -> None:
        """End every running job process and wait for it, so none outlives the run."""
        for item in self._running:
            item.process.kill()
        for item in self._running:
            item.process.join(_JOIN_S)
            item.conn.close()
        self._running.clear()


def predicted_cost(job) -> float:
    """A relative cost to start the long jobs first, so the workers finish together (measured at `quick`:
    DFT single points are 99 % of a study's time, tetrahedral states take 25–76 SCF cycles against 12–24 for
    planar ones, and a cycle grows about with the square of the electron count under density fitting)."""
    s = job.spec
    if s.method == "xtb":
        return 1.0
    electrons = _electrons(s.formula, json.dumps(s.complex, sort_keys=True))
    shape = 2.0 if s.arrangement == "T-4" else 1.0
    relaxation = 10.0 if job.task != "single-point" else 1.0
    return 1000.0 * shape * relaxation * electrons ** 2


@cache
def _electrons(formula: str, complex_json: str) -> int:
    from ase.data import atomic_numbers

    from ..compute.tasks import complex_from_spec

    cx = complex_from_spec(SimpleNamespace(complex=json.loads(complex_json)))
    return atomic_numbers[cx.metal.symbol] + sum(atomic_numbers[a] for lig in cx.ligands for a in lig.symbols)


class _RunningFile:
    """`running.json` in the study folder while a run is on: which jobs run now, so `fourfold status` can
    tell running from pending and estimate the time left. Written whole (temporary name, rename)."""

    def __init__(self, out_dir: Path, workers: int):
        self.path = out_dir / "running.json"
        self.head = {"pid": os.getpid(), "host": socket.gethostname(), "workers": workers,
                     "started_unix": time.time()}
        self._last = None

    def update(self, labels: list[str]) -> None:
        if labels == self._last:
            return
        self._last = list(labels)
        partial = self.path.with_name(f".{self.path.name}.{os.getpid()}.partial")
        partial.write_text(json.dumps({**self.head, "running": labels}), encoding="utf-8")
        os.replace(partial, self.path)

    def close(self) -> None:
        self.path.unlink(missing_ok=True)


def _critical_path_costs(jobs) -> dict[str, float]:
    """Each job's cost plus its costliest chain of descendants: a cheap xTB relaxation whose single point is
    long must start early."""
    children: dict[str, list] = {}
    for job in jobs:
        if job.parent:
            children.setdefault(job.parent, []).append(job)
    found: dict[str, float] = {}

    def cost(job) -> float:
        if job.key not in found:
            found[job.key] = predicted_cost(job) + max((cost(c) for c in children.get(job.key, ())), default=0.0)
        return found[job.key]

    for job in jobs:
        cost(job)
    return found


def _drive(pending, stored, store, shelf, pool, summary, progress, running_file):
    priority = _critical_path_costs(pending)
    pending.sort(key=lambda job: priority[job.key], reverse=True)  # stable: ties keep the expansion order
    if progress:
        progress(summary, [])
    try:
        while pending or pool.running_labels():
            # Jobs whose parent failed are failures too (recorded, so a --retry-failed rerun picks them up).
            for job in [j for j in pending if j.parent and stored.get(j.parent) == "failed"]:
                pending.remove(job)
                _finish(job, failed_result(job, "parent job failed", None), store, shelf, stored, summary)
            ready = [j for j in pending if not j.parent or stored.get(j.parent) == "done"]
            while ready and pool.free_slots() > 0:
                job = ready.pop(0)
                pending.remove(job)
                pool.submit(job, store.get(job.parent) if job.parent else None)
            running_file.update(pool.running_labels())
            if progress:
                progress(summary, pool.running_labels())
            with deferred():  # a result received is kept before a stop takes effect (at most _POLL_S later)
                for job, result in pool.collect(_POLL_S):
                    summary.ran += 1
                    summary.job_seconds += float(result.get("wall_seconds") or 0.0)
                    _finish(job, result, store, shelf, stored, summary)
                    if progress:
                        progress(summary, pool.running_labels())
    finally:
        pool.close()
        running_file.close()


def _finish(job, result, store, shelf, stored, summary):
    """Keep one finished job: its record first (so a store that fails now loses nothing), then its row."""
    with deferred():
        try:
            shelf.write(job, result)
        except OSError as error:
            raise StoreError(f"cannot keep the result of {job.label} ({describe_os_error(error)}); finished jobs "
                             "before it are kept") from None
        store.record(job, result)
    stored[job.key] = result["status"]
    if result["status"] == "done":
        summary.done += 1
    else:
        summary.failed += 1
        summary.failures.append((job.label, result.get("reason", "unknown")))
