"""A study's jobs on a Dask cluster: the pool interface of the local runner on `dask.distributed`.

The driver stays the only writer of the store: each job is one Dask task that returns a plain dict.
The task does not run the chemistry in the worker process itself; it starts the job in a process of its
own (`python -c` job_process_main), as the local pool does, because only a process of its own gives
  - the job's output in its log file (redirecting a worker's stdout would catch every task of it),
  - its thread count, limited inside that process (threadpoolctl and `pyscf.lib.num_threads`),
  - a crash (exception, segfault, the OOM killer taking the job) as a failed result, worker unharmed,
  - the per-job timeout: Dask cannot stop a running task, so the task kills the job's process once the
    job has run `timeout_s` seconds (counted from the job's start on a worker, not from submission).

A worker that dies while running a job (node lost, batch job ended, worker killed) makes the scheduler run
the job again on another worker. Clusters fourfold starts (`--cluster`) allow one such retry
(`distributed.scheduler.allowed-failures = 1`), after which the job is recorded failed with that reason;
for a scheduler started by hand the same setting decides (the README's example sets it). A job is never
lost: if the scheduler drops a job (cancelled, e.g. the scheduler restarted) the run stops with nothing
recorded for it, so the next run picks it up.
"""

from __future__ import annotations

import os
import pickle
import shutil
import signal
import subprocess
import sys
import threading
import time
import tomllib
from pathlib import Path

from ..errors import ComputeError, InputError
from .process import FAULT_ENV, complete_failure, die_with_parent, exit_reason, job_paths, job_process_body

_SUBMIT_COMMANDS = {"slurm": "sbatch", "pbs": "qsub"}
# Exported in each batch job's script, so the Dask worker's own numpy starts with the job's thread count.
THREAD_ENV = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
# The scheduler fourfold starts tries a job whose worker died once more, then records it failed.
WORKER_DEATHS_RETRIED = 1
_SLOTS_REFRESH_S = 1.0


def _first_line(error: BaseException) -> str:
    text = str(error).strip()
    return text.splitlines()[0] if text else type(error).__name__


# ------------------------------------------------------------------------------------------ worker side

def job_process_main() -> None:
    """Body of a job's own process: arguments (pickled by the task that started it) on stdin, the
    result back on the original stdout; everything the job prints goes to its log (job_process_body)."""
    worker, job, parent, log_path, chk_path, threads = pickle.load(sys.stdin.buffer)
    die_with_parent(worker)  # a lost worker leaves no job running unseen
    from multiprocessing.connection import Connection

    result_pipe = Connection(os.dup(1), readable=False)
    os.dup2(2, 1)  # stderr is the job's log already: nothing printed from here on can reach the result pipe
    job_process_body(job, parent, log_path, chk_path, threads, result_pipe)


def _kill_worker_fault(label: str) -> None:
    # Test hook beside the runner's (FOURFOLD_FAULT): "kill-worker:TEXT" kills the Dask worker process
    # that picks up the job whose label contains TEXT, as a lost node would.
    for item in filter(None, os.environ.get(FAULT_ENV, "").split(",")):
        mode, _, text = item.partition(":")
        if mode == "kill-worker" and text and text in label:
            os.kill(os.getpid(), signal.SIGKILL)


def run_on_worker(job, parent, log_path, chk_path, threads: int, timeout_s: float) -> dict:
    """The Dask task: one job in a process of its own, its result as plain data."""
    from multiprocessing.connection import Connection

    _kill_worker_fault(job.label)
    for path in filter(None, (log_path, chk_path)):
        Path(path).parent.mkdir(parents=True, exist_ok=True)  # a worker without the shared folder
    code = "from fourfold.study.cluster import job_process_main; job_process_main()"
    with open(log_path, "ab") as log:
        process = subprocess.Popen([sys.executable, "-c", code], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                   stderr=log)
    reader = Connection(os.dup(process.stdout.fileno()), writable=False)
    process.stdout.close()
    try:
        process.stdin.write(pickle.dumps((os.getpid(), job, parent, log_path, chk_path, threads)))
        process.stdin.close()
    except BrokenPipeError:  # the process died at start; its exit status says why
        pass
    result = None
    if reader.poll(timeout_s):
        try:
            result = reader.recv()
        except EOFError:
            result = None
    else:
        process.kill()
        result = {"status": "failed", "reason": f"timeout after {timeout_s:.0f} s"}
    reader.close()
    process.wait()
    return result if result is not None else {"status": "failed", "reason": exit_reason(process.returncode, log_path)}


# ------------------------------------------------------------------------------------------ driver side

class DaskPool:
    """The runner's pool interface on a `distributed.Client`: as many jobs in flight as the workers have
    threads (each worker thread drives one job process)."""

    def __init__(self, client, threads: int, out_dir, timeout_s: float, cluster=None):
        self.client, self.threads, self.timeout_s, self._cluster = client, threads, timeout_s, cluster
        self.out_dir = Path(out_dir).resolve()  # workers have other working folders
        self._running: dict = {}  # future -> (job, parent result)
        self._slots, self._slots_checked = 0, float("-inf")
        self._ended = threading.Event()  # set from Dask's callback thread when any job's future ends

    def _worker_threads(self) -> int:
        now = time.monotonic()
        if now - self._slots_checked > _SLOTS_REFRESH_S:
            self._slots = sum(self.client.nthreads().values())
            self._slots_checked = now
        return self._slots

    def free_slots(self) -> int:
        return self._worker_threads() - len(self._running)

    def running_labels(self) -> list[str]:
        return [job.label for job, _ in self._running.values()]

    def submit(self, job, parent: dict | None) -> None:
        log_path, chk_path = job_paths(self.out_dir, job)
        # The job key as the task key: a resumed driver rejoins a job still running for a killed one.
        future = self.client.submit(run_on_worker, job, parent, log_path, chk_path, self.threads, self.timeout_s,
                                    key=f"fourfold-{job.key}")
        self._running[future] = (job, parent)
        future.add_done_callback(lambda _: self._ended.set())

    def collect(self, wait_s: float) -> list:
        self._ended.wait(wait_s)
        self._ended.clear()
        ended = []
        for future in [f for f in self._running if f.done()]:
            job, parent = self._running.pop(future)
            result = self._outcome(future, job)
            future.release()
            ended.append((job, complete_failure(job, result, parent)))
        return ended

    @staticmethod
    def _outcome(future, job) -> dict:
        if future.status == "finished":
            return future.result()
        if future.cancelled():
            raise ComputeError(f"the Dask scheduler dropped job {job.label!r} (restarted or lost?); nothing was "
                               "recorded for it: rerun the same command to resume")
        from distributed.scheduler import KilledWorker

        error = future.exception()
        if isinstance(error, KilledWorker):
            return {"status": "failed", "reason": f"its Dask worker died on each of {error.allowed_failures + 1} "
                                                  "tries (lost node, killed, or out of memory)"}
        return {"status": "failed", "reason": f"{type(error).__name__}: {_first_line(error)}"}

    def close(self) -> None:
        try:
            for future in self._running:
                future.cancel()
            self.client.close()
        finally:
            if self._cluster is not None:
                self._cluster.close()


def connect(address: str):
    """A client of the running scheduler at ``address`` (tcp://HOST:PORT)."""
    Client = _distributed().Client
    try:
        return Client(address, set_as_default=False)  # waits distributed.comm.timeouts.connect (30 s)
    except (OSError, TimeoutError, ValueError) as error:
        raise InputError(f"cannot reach the Dask scheduler at {address} ({_first_line(error)}); start one with "
                         "`dask scheduler` or check --scheduler tcp://HOST:PORT") from None


def _distributed():
    try:
        import distributed
    except ImportError:
        raise InputError("--scheduler and --cluster need the cluster extra: pip install \"fourfold[cluster]\"") from None
    return distributed


def load_cluster_file(path) -> dict:
    """The [cluster] table of a separate TOML file (--cluster-config), validated as a recipe's is."""
    from .recipe import cluster_settings, read_toml_text

    text = read_toml_text(Path(path), "cluster file")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise InputError(f"{path}: not valid TOML ({error}); check quotes, brackets and '=' signs") from None
    unknown = sorted(set(data) - {"cluster"})
    if unknown or "cluster" not in data:
        raise InputError(f"{path}: top level: {'unknown key ' + repr(unknown[0]) if unknown else 'no [cluster] table'};"
                         " the file holds one [cluster] table (cores, memory, walltime, queue, account, jobs)")
    return cluster_settings(str(path), data["cluster"])


def jobqueue_cluster(kind: str, settings: dict, threads: int, scheduler_options: dict | None = None):
    """A dask-jobqueue cluster whose batch jobs each run one Dask worker with cores // threads job slots.

    The batch system books `cores` CPUs and `memory` (SLURM --cpus-per-task/--mem, PBS ncpus/mem); the
    worker gets the same memory as its explicit --memory-limit; the job script exports the thread count of
    one job (OMP/BLAS) before the worker starts. Nothing is submitted until the cluster is scaled."""
    _distributed()
    import dask
    import dask_jobqueue

    cores = settings["cores"]
    if threads > cores:
        raise InputError(f"--threads {threads} is more than the {cores} cores of one batch job ([cluster] cores): "
                         "lower --threads or raise cores")
    options = dict(cores=cores // threads, processes=1, memory=settings["memory"], walltime=settings["walltime"],
                   queue=settings.get("queue"), account=settings.get("account"),
                   job_script_prologue=[f"export {name}={threads}" for name in THREAD_ENV],
                   scheduler_options=scheduler_options or {})
    with dask.config.set({"distributed.scheduler.allowed-failures": WORKER_DEATHS_RETRIED}):
        if kind == "slurm":
            return dask_jobqueue.SLURMCluster(**options, job_cpu=cores)
        if kind == "pbs":
            from dask.utils import parse_bytes
            from dask_jobqueue.pbs import pbs_format_bytes_ceil

            memory = pbs_format_bytes_ceil(parse_bytes(settings["memory"]))
            return dask_jobqueue.PBSCluster(**options, resource_spec=f"select=1:ncpus={cores}:mem={memory}")
    raise InputError(f"--cluster {kind!r}: use slurm or pbs")


def pool_factory(threads: int, scheduler: str | None = None, cluster_kind: str | None = None,
                 cluster_settings: dict | None = None):
    """What run_study calls to make its executor: a DaskPool on a running scheduler, or on batch jobs."""

    if cluster_kind and shutil.which(_SUBMIT_COMMANDS[cluster_kind]) is None:
        # checked before the run starts: without it the workers never come and the driver waits for ever
        raise InputError(f"--cluster {cluster_kind}: `{_SUBMIT_COMMANDS[cluster_kind]}` is not on PATH; run fourfold "
                         "on a login node of the batch system, or use --scheduler with workers you start")

    def make(out_dir, timeout_s):
        if scheduler:
            return DaskPool(connect(scheduler), threads, out_dir, timeout_s)
        cluster = jobqueue_cluster(cluster_kind, cluster_settings, threads)
        try:
            cluster.scale(jobs=cluster_settings["jobs"])
            client = _distributed().Client(cluster, set_as_default=False)
        except BaseException:
            cluster.close()
            raise
        return DaskPool(client, threads, out_dir, timeout_s, cluster)

    return make
