#!/usr/bin/env python
"""overnight: whether recipes/overnight.toml fits a night, extrapolated from one of its complexes run in full.

Runs [NiCl4]2- through the pipeline as a user would (``run_pipeline``), with the overnight recipe's level,
arrangements and relaxations (held and free) and every spin state the study allows, then reads the CPU time of
each job from the store (wall seconds × ``--threads``). Every job of the whole overnight recipe (expanded, not
run) gets the measured time of the [NiCl4]2- job of the same task, relaxation kind and engine (same arrangement,
and the same 2S where [NiCl4]2- has it; else the mean over its spin states), scaled by (basis functions of the
complex / basis functions of [NiCl4]2-)^3 in that job's basis. The exponent 3 is an assumption: the cost of
density-fitted DFT taken as cubic in the basis (common practice, no source); xTB jobs, which have no Gaussian
basis, are scaled by their def2-SVP count as a proxy. Wall time on N cores is bounded below by the CPU
time / N and by the longest chain of dependent jobs (one state's chain runs in series, one thread per job);
the larger of the two is the estimate, and CPU/N + chain is the bound of any greedy schedule above it. On a
machine shared with other work a job's wall seconds overstate its CPU; measure with the machine otherwise idle.

Prints the measured CPU-hours per state split by task, the extrapolation per complex, the wall times on 2 and
8 cores, and last ``overnight.toml extrapolated: X h on 2 cores, Y h on 8 cores (measured on [NiCl4]2- at DATE)``.

Run: ``python benchmarks/overnight.py [--out DIR] [--level standard] [--workers 2] [--threads 1]``. At
``standard`` the measurement is hours of CPU; ``--out DIR`` keeps it, and the same command run again resumes
(or, once finished, only prints). ``--level screen`` (GFN2-xTB, seconds) tries the script end to end; the
extrapolation is then of the overnight recipe at that level.
"""

from __future__ import annotations

import argparse
import json
import statistics
import tempfile
import tomllib
from collections import defaultdict
from datetime import datetime
from functools import cache
from pathlib import Path

import tomli_w

from fourfold.chem.complex import complex_from_formula
from fourfold.compute.levels import PRESETS
from fourfold.compute.pyscf_engine import build_mole
from fourfold.geometry.builder import build
from fourfold.pipeline import RunOptions, open_store, run_pipeline
from fourfold.study.jobs import expand
from fourfold.study.recipe import load_recipe, parse_recipe
from fourfold.study.records import RecordShelf

ROOT = Path(__file__).resolve().parents[1]
OVERNIGHT = ROOT / "recipes" / "overnight.toml"
MEASURED = "[NiCl4]2-"
CORES = (2, 8)
COST_EXPONENT = 3  # cost of density-fitted DFT ∝ (basis functions)^3: common practice, no source
XTB_PROXY_BASIS = "def2-svp"  # xTB has no Gaussian basis; its jobs scale with this basis's count
SETTINGS = "overnight-benchmark.json"  # the --threads the folder was measured with
TASK_NAMES = {"relax-held": "relaxation", "relax-free": "relaxation", "path-point": "relaxation",
              "frequencies": "frequencies", "single-point": "single point"}
SECONDS_PER_HOUR = 3600.0


def measured_recipe_text(level: str) -> str:
    """overnight.toml's level, arrangements, relaxations and run settings, with [NiCl4]2- alone, at ``level``."""
    data = tomllib.loads(OVERNIGHT.read_text(encoding="utf-8"))
    kept = {key: data[key] for key in ("arrangements", "relaxations", "frequencies", "run") if key in data}
    complexes = [c for c in data["complex"] if c.get("formula") == MEASURED]
    if not complexes:
        raise SystemExit(f"{OVERNIGHT} has no {MEASURED}: the benchmark measures one of the recipe's own complexes")
    return tomli_w.dumps({"title": f"overnight benchmark: {MEASURED}", "level": level, **kept, "complex": complexes})


def _checked_threads(folder: Path, threads: int) -> None:
    """CPU time is wall × threads: a folder resumed with another --threads would mix two measures."""
    path = folder / SETTINGS
    if path.exists():
        before = json.loads(path.read_text(encoding="utf-8"))["threads"]
        if before != threads:
            raise SystemExit(f"{folder} was measured with --threads {before}: rerun with --threads {before}, "
                             "or give a new --out")
    else:
        folder.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps({"threads": threads}), encoding="utf-8")


def _progress_printer():
    """A progress callback printing one line each time a job finishes."""
    shown = []

    def progress(summary, running) -> None:
        finished = summary.done + summary.failed
        if not shown or shown[-1] != finished:
            shown.append(finished)
            print(f"  {finished}/{summary.total} jobs finished ({summary.failed} failed)", flush=True)

    return progress


def _group(job) -> tuple[str, str]:
    return TASK_NAMES[job.task], "xTB" if job.spec.method == "xtb" else "DFT"


def _state_name(job) -> str:
    s = job.spec
    return f"{s.arrangement} {s.isomer + ' ' if s.isomer else ''}2S={s.spin2s} {s.kind}"


def measured_jobs(study, folder: Path, threads: int) -> tuple[list[tuple], list[str]]:
    """(job, CPU seconds, status) for every timed job of ``study`` in the folder's store, and the labels of
    stored jobs with no time (stopped by the timeout, crashed, or never started because their parent failed)."""
    jobs = {job.key: job for job in expand(study)}
    timed, untimed = [], []
    for row in open_store(folder).results():
        job = jobs.get(row["job_key"])
        if job is None:
            continue
        if row.get("wall_seconds") is None:
            untimed.append(f"{job.label} {job.task}: {row.get('reason', row['status'])}")
        else:
            timed.append((job, float(row["wall_seconds"]) * threads, row["status"]))
    return timed, untimed


def print_measured(measured: list[tuple]) -> None:
    order = list(dict.fromkeys(TASK_NAMES.values()))
    groups = sorted({_group(job) for job, _, _ in measured}, key=lambda g: (order.index(g[0]), g[1]))
    table = defaultdict(dict)
    failed = set()
    for job, cpu_s, status in measured:
        cells = table[_state_name(job)]
        cells[_group(job)] = cells.get(_group(job), 0.0) + cpu_s / SECONDS_PER_HOUR
        if status != "done":
            failed.add(_state_name(job))
    print(f"\nMeasured CPU-hours per state of {MEASURED} (wall × threads; a free state's xTB pre-relaxation is the held "
          "state's job, run once)")
    print(f"{'state':24s}" + "".join(f"{' '.join(g):>18s}" for g in groups) + f"{'total':>12s}")
    for state in sorted(table):
        cells = table[state]
        shown = "".join(f"{cells[g]:18.4f}" if g in cells else f"{'-':>18s}" for g in groups)
        note = "  (a job failed: its time is up to the failure)" if state in failed else ""
        print(f"{state:24s}{shown}{sum(cells.values()):12.4f}{note}")
    totals = "".join(f"{sum(c.get(g, 0.0) for c in table.values()):18.4f}" for g in groups)
    print(f"{'all states':24s}{totals}{sum(sum(c.values()) for c in table.values()):12.4f}")


@cache
def basis_functions(formula: str, basis: str) -> int:
    """Basis functions of a complex (def2 ECP on 4d/5d metals); the count does not depend on the geometry."""
    cx = complex_from_formula(formula)
    return build_mole(build(cx, "T-4"), cx.charge, cx.allowed_spin2s[0], basis).nao_nr()


class Timings:
    """Measured CPU seconds of [NiCl4]2- jobs, looked up by task, kind, engine, arrangement and 2S."""

    def __init__(self, measured: list[tuple]):
        self.exact, self.arrangement, self.task = defaultdict(list), defaultdict(list), defaultdict(list)
        for job, cpu_s, _ in measured:
            task = (job.task, job.spec.kind, job.spec.method)
            self.task[task].append(cpu_s)
            self.arrangement[(*task, job.spec.arrangement)].append(cpu_s)
            self.exact[(*task, job.spec.arrangement, job.spec.spin2s)].append(cpu_s)
        self.matched = defaultdict(int)

    def cpu_seconds(self, job) -> float:
        task = (job.task, job.spec.kind, job.spec.method)
        for how, table, key in (("same 2S", self.exact, (*task, job.spec.arrangement, job.spec.spin2s)),
                                ("mean over 2S", self.arrangement, (*task, job.spec.arrangement)),
                                ("mean over arrangements", self.task, task)):
            if table.get(key):
                self.matched[how] += 1
                return statistics.mean(table[key])
        raise SystemExit(f"no timed {MEASURED} job for a {job.task} ({job.spec.kind}, {job.spec.method}) job: finish "
                         "the measurement (rerun with the same --out), or see the jobs with no time above")


def extrapolate(jobs, timings: Timings) -> tuple[dict, dict]:
    """Per job key: estimated CPU seconds, and the CPU seconds of its chain up to and including it."""
    cpu, chain = {}, {}
    for job in jobs:  # parents before children
        basis = job.spec.engine.get("basis") or XTB_PROXY_BASIS
        ratio = basis_functions(job.spec.formula, basis) / basis_functions(MEASURED, basis)
        cpu[job.key] = timings.cpu_seconds(job) * ratio ** COST_EXPONENT
        chain[job.key] = cpu[job.key] + (chain[job.parent] if job.parent else 0.0)
    return cpu, chain


def print_extrapolation(study, jobs, cpu: dict, chain: dict) -> tuple[float, float]:
    print(f"\nExtrapolated to {Path(study.source_path).name} at level {study.level.name} ({len(jobs)} jobs); "
          f"cost ∝ (basis functions)^{COST_EXPONENT}, an assumption")
    print(f"{'complex':18s}{'atoms':>6s}{'nbf SVP':>9s}{'nbf TZVP':>10s}{'jobs':>6s}{'CPU h':>10s}{'longest chain h':>17s}")
    for entry in study.complexes:
        formula = entry.complex.formula
        own = [j for j in jobs if j.spec.formula == formula]
        atoms = len(build(entry.complex, entry.arrangements[0]))
        svp, tzvp = basis_functions(formula, "def2-svp"), basis_functions(formula, "def2-tzvp")
        print(f"{formula:18s}{atoms:6d}{svp:9d}{tzvp:10d}{len(own):6d}{sum(cpu[j.key] for j in own) / SECONDS_PER_HOUR:10.3f}"
              f"{max(chain[j.key] for j in own) / SECONDS_PER_HOUR:17.3f}")
    total_h = sum(cpu.values()) / SECONDS_PER_HOUR
    longest = max(jobs, key=lambda j: chain[j.key])
    longest_h = chain[longest.key] / SECONDS_PER_HOUR
    print(f"{'all':18s}{'':31s}{total_h:10.3f}{longest_h:17.3f}  (longest: {longest.label})")
    timeout_s = study.run.get("timeout_s")
    if timeout_s:
        beyond = [j for j in jobs if cpu[j.key] > timeout_s]
        print(f"jobs estimated beyond the recipe's timeout_s of {timeout_s / SECONDS_PER_HOUR:.1f} h (one thread; such a "
              f"job is stopped and fails): {len(beyond) or 'none'}")
        for job in beyond:
            print(f"  {job.label} {job.task} {_group(job)[1]}: {cpu[job.key] / SECONDS_PER_HOUR:.1f} h")
    print("\nWall time (one thread per job, workers = cores): max(CPU / cores, longest chain); CPU / cores + chain bounds "
          "any greedy schedule")
    print(f"{'cores':>6s}{'CPU/cores h':>13s}{'chain h':>10s}{'estimate h':>12s}{'greedy bound h':>16s}")
    walls = {}
    for cores in CORES:
        walls[cores] = max(total_h / cores, longest_h)
        print(f"{cores:6d}{total_h / cores:13.3f}{longest_h:10.3f}{walls[cores]:12.3f}{total_h / cores + longest_h:16.3f}")
    return walls[CORES[0]], walls[CORES[1]]


def measured_date(folder: Path, measured: list[tuple]) -> str:
    """The day the last measured job finished (its record file's time)."""
    shelf = RecordShelf(folder).folder
    times = [(shelf / f"{job.key}.json").stat().st_mtime for job, _, _ in measured if (shelf / f"{job.key}.json").exists()]
    return datetime.fromtimestamp(max(times)).strftime("%Y-%m-%d") if times else "an unknown date"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", help="measurement folder (kept; the same command resumes it); default a temporary one")
    parser.add_argument("--level", default="standard", choices=tuple(PRESETS),
                        help="level of the measurement and the extrapolation")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--threads", type=int, default=1)
    args = parser.parse_args()
    folder = Path(args.out) if args.out else Path(tempfile.mkdtemp(prefix="fourfold-overnight-")) / "nicl4"
    _checked_threads(folder, args.threads)
    study = parse_recipe(measured_recipe_text(args.level), f"overnight benchmark ({MEASURED})")
    print(f"Running {MEASURED} at level {study.level.name}, {', '.join(study.relaxations)}, 2S in "
          f"{list(study.complexes[0].spins)}, into {folder} (workers {args.workers}, threads {args.threads})", flush=True)
    outcome = run_pipeline(study, RunOptions(folder, workers=args.workers, threads=args.threads, progress=_progress_printer()))
    print(f"  run: {outcome.summary.ran} jobs run now, {outcome.summary.skipped} already stored, "
          f"{outcome.summary.wall_seconds:.0f} s wall")
    measured, untimed = measured_jobs(study, folder, args.threads)
    print_measured(measured)
    for line in untimed:
        print(f"no time (left out of the extrapolation): {line}")
    timings = Timings(measured)
    overnight = load_recipe(OVERNIGHT).with_level(study.level)
    jobs = expand(overnight)
    cpu, chain = extrapolate(jobs, timings)
    print("matched to the measured job of the same task, kind, engine and arrangement: "
          + ", ".join(f"{how} {count}" for how, count in timings.matched.items()))
    two, eight = print_extrapolation(overnight, jobs, cpu, chain)
    at = "" if study.level.name == load_recipe(OVERNIGHT).level.name else f" at level {study.level.name}"
    print(f"\novernight.toml{at} extrapolated: {two:.2f} h on {CORES[0]} cores, {eight:.2f} h on {CORES[1]} cores "
          f"(measured on {MEASURED} at {measured_date(folder, measured)})")


if __name__ == "__main__":
    main()
