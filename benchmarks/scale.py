#!/usr/bin/env python
"""scale: study throughput (jobs per minute) on 1 vs 2 Dask workers, the same jobs, measured in one run.

Run: ``benchmarks/scale.py [--complexes 2] [--rounds 1]`` (needs the cluster extra). Starts a `dask scheduler`
and `dask worker` processes (one process, one thread each) on 127.0.0.1, then runs the same screen-level
study (GFN2-xTB held relaxations of four-coordinate chlorides: 4 independent jobs per complex, no job
waits on another) through `--scheduler`'s pool, first on one worker, then on two (each run into a fresh
folder, so nothing is skipped). With --rounds > 1 the order alternates (1,2 then 2,1 ...) so drift in
the machine's load falls on both sides. Prints one line per run (jobs/min, CPU seconds per job, cores
kept busy), then the ratio (2 workers / 1 worker) last. Target on a 2-core machine: ≥ 1.7×. Wall times on a
shared machine move with its other load.
"""

import argparse
import json
import os
import shutil
import signal
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from fourfold.pipeline import RunOptions, run_pipeline
from fourfold.study.cluster import pool_factory
from fourfold.study.recipe import parse_recipe

COMPLEXES = ("[NiCl4]2-", "[PdCl4]2-", "[PtCl4]2-", "[NiBr4]2-")


def recipe(count: int) -> str:
    entries = "".join(f'\n[[complex]]\nformula = "{formula}"\n' for formula in COMPLEXES[:count])
    return f'title = "scale"\nlevel = "screen"\nrelaxations = ["held"]\n[run]\nmax_steps = 40\n{entries}'


def start(command: list, log: Path) -> subprocess.Popen:
    return subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=open(log, "w"), start_new_session=True)


def wait_for_workers(address: str, count: int) -> None:
    from distributed import Client

    with Client(address, timeout=60) as client:
        client.wait_for_workers(count, timeout=120)


def worker_cpu_seconds(nanny: subprocess.Popen) -> float:
    """CPU time of a `dask worker` (nanny, worker process, and the job processes the worker has waited for).

    Equal CPU per job on 1 and 2 workers means the work scales and a ratio below 2 is the share of the
    cores the machine's other load left us."""
    import psutil

    total = 0.0
    for process in [psutil.Process(nanny.pid), *psutil.Process(nanny.pid).children()]:
        times = process.cpu_times()
        total += times.user + times.system + times.children_user + times.children_system
    return total


def wait_for_workers_gone(address: str) -> None:
    from distributed import Client

    with Client(address, timeout=60) as client:
        while client.nthreads():
            time.sleep(0.2)


def timed_run(study, address: str, folder: Path) -> tuple[int, float, float]:
    """Jobs done, wall seconds, and the CPU seconds the driver (this process) spent on them."""
    started, cpu_started = time.perf_counter(), time.process_time()
    options = RunOptions(folder, threads=1, pool_factory=pool_factory(1, scheduler=address))
    summary = run_pipeline(study, options).summary
    wall, driver_cpu = time.perf_counter() - started, time.process_time() - cpu_started
    if summary.failed:
        raise SystemExit(f"{summary.failed} jobs failed in {folder}: {summary.failures}")
    return summary.done, wall, driver_cpu


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--complexes", type=int, default=2, choices=range(1, len(COMPLEXES) + 1),
                        help="complexes in the study (4 jobs each)")
    parser.add_argument("--rounds", type=int, default=1, help="1-worker/2-worker pairs, order alternating")
    args = parser.parse_args()
    study = parse_recipe(recipe(args.complexes), "scale.toml")
    base = Path(tempfile.mkdtemp(prefix="fourfold-scale-"))
    dask = [sys.executable, "-m", "dask"]
    worker_command = [*dask, "worker", "--scheduler-file", str(base / "scheduler.json"), "--host", "127.0.0.1",
                      "--nworkers", "1", "--nthreads", "1", "--memory-limit", "4GiB", "--no-dashboard"]
    processes = [start([*dask, "scheduler", "--host", "127.0.0.1", "--port", "0", "--no-dashboard",
                        "--scheduler-file", str(base / "scheduler.json")], base / "scheduler.log")]
    try:
        while not (base / "scheduler.json").exists():
            time.sleep(0.2)
        address = json.loads((base / "scheduler.json").read_text())["address"]
        print(f"{len(study.complexes) * 4} screen-level jobs per run; Dask scheduler at {address}; "
              f"load average {os.getloadavg()[0]:.1f} at start")
        ratios = []
        for index in range(args.rounds):
            rates = {}
            for count in ((1, 2) if index % 2 == 0 else (2, 1)):
                # Fresh workers for each run, started (and seen by the scheduler) before the clock starts.
                workers = [start(worker_command, base / f"worker{index}_{count}_{i}.log") for i in range(count)]
                processes += workers
                wait_for_workers(address, count)
                cpu_before = sum(worker_cpu_seconds(worker) for worker in workers)  # the workers' start-up
                jobs, wall, driver_cpu = timed_run(study, address, base / f"run{index}_{count}")
                cpu = sum(worker_cpu_seconds(worker) for worker in workers) - cpu_before
                for worker in workers:
                    os.killpg(worker.pid, signal.SIGKILL)
                    worker.wait()
                wait_for_workers_gone(address)
                rates[count] = jobs / wall * 60
                print(f"round {index + 1}: {count} worker{'s' if count > 1 else ''}: {jobs} jobs in {wall:.1f} s "
                      f"= {rates[count]:.1f} jobs/min; workers {cpu / jobs:.1f} CPU s per job, {cpu / wall:.2f} cores busy; "
                      f"driver {driver_cpu / wall:.2f} cores")
            ratios.append(rates[2] / rates[1])
        print(f"load average {os.getloadavg()[0]:.1f} at end (a shared machine: other work moves these figures)")
        print(f"throughput ratio 2 workers / 1 worker: {statistics.median(ratios):.2f}x "
              f"(median of {len(ratios)}; target >= 1.7x)")
    finally:
        for process in reversed(processes):
            if process.poll() is None:
                os.killpg(process.pid, signal.SIGKILL)
            process.wait()
        shutil.rmtree(base, ignore_errors=True)


if __name__ == "__main__":
    main()
