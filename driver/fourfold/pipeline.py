"""The whole job in one call: a study in; its jobs run, its verdict built and its report written.

This is what `fourfold run` and `fourfold demo` do, and what a notebook or a benchmark calls:

    from fourfold.pipeline import RunOptions, run_pipeline, scan
    from fourfold.study.recipe import load_recipe

    outcome = run_pipeline(load_recipe("recipes/demo.toml"), RunOptions(out_dir="outputs/demo"))
    print(outcome.comparison.complexes[0].computed_ground)
    nickel = scan("[NiCl4]2-", level="screen")          # one complex, every state; a ComplexComparison

The store is the folder's results.db unless a PostgreSQL URL is given; `fourfold status` and
`fourfold report` open the same store the same way (``open_store``). One process at a time writes a
folder: the run lock is held over running and reporting, over a report written again and over a rebuild.
Every finished job also has a record in the folder's records/, from which ``rebuild_store`` makes the
store again. A command stopped by a signal (fourfold.study.stopping) leaves no temporary file of its own
behind and says how to go on.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from .errors import FourfoldError, InputError, describe_os_error
from .report.render import Report, write_report
from .report.tables import FORMATS
from .study.recipe import load_folder_study, parse_recipe, scan_recipe_text
from .study.records import RecordShelf
from .study.runner import RunLock, RunSummary, run_study
from .study.status import study_status
from .study.stopping import Stopped
from .study.store import ResultStore, rebuild_sqlite, store_records
from .verdict.comparison import Comparison, ComplexComparison

_POSTGRES_PREFIXES = ("postgresql://", "postgres://")


@dataclass(frozen=True)
class RunOptions:
    """How a study is run and reported. ``progress(summary, running_labels)`` is called as jobs finish;
    ``pool_factory(out_dir, timeout_s)`` makes another executor (fourfold.study.cluster); ``on_start()`` is
    called once the folder, store and executor are ready, before any job runs."""

    out_dir: Path | str
    workers: int = 2
    threads: int = 1
    retry_failed: bool = False
    timeout_s: float | None = None
    store_url: str | None = None
    unit: str = "kj"
    formats: tuple[str, ...] = FORMATS
    figure_style: str = "annotated"  # or "journal": no titles or caveats in the figures (they go to captions.md)
    ladder_energy: str = "E"  # the spin ladders show E, or G (free minima's free energies)
    pool_factory: Callable | None = None
    progress: Callable | None = None
    on_start: Callable | None = None


@dataclass
class Outcome:
    summary: RunSummary
    report: Report

    @property
    def comparison(self) -> Comparison:
        return self.report.comparison


def check_store_url(store_url: str | None) -> None:
    if store_url and not store_url.startswith(_POSTGRES_PREFIXES):
        raise InputError("--store takes a postgresql://USER@HOST:PORT/DB address; leave it out to keep results.db "
                         "in the study folder")
    if store_url and store_url.split("://", 1)[1].split("/", 1)[0].count("@") > 1:
        # the server's client library would read the rest of the password as the host name, and echo it
        raise InputError("--store: the user name or password holds an '@': write it as %40 in the address")


def open_store(folder, store_url: str | None = None, must_exist: bool = True) -> ResultStore:
    """The store of a study folder: ``store_url`` (PostgreSQL) when given, else the folder's results.db
    (a damaged one, or one missing while records of finished jobs exist, raises a StoreError that says how to
    rebuild it)."""
    check_store_url(store_url)
    if store_url:
        return ResultStore(store_url)
    path = Path(folder) / "results.db"
    if must_exist and not path.exists() and not RecordShelf(folder).keys():
        raise InputError(f"{folder} has no results.db: run `fourfold run RECIPE --out {folder}` first, or give "
                         "--store if its results are in PostgreSQL")
    return ResultStore(path, create=not must_exist)


def _remove_own_partials(folder: Path) -> None:
    """The temporary files this process was writing when it stopped (their names carry its PID)."""
    pid = os.getpid()
    for pattern in (f"**/.*.{pid}.partial", f".*.{pid}.new", f".*.{pid}.rebuild"):
        for path in folder.glob(pattern):
            path.unlink(missing_ok=True)


@contextmanager
def _writing(folder: Path, stopped_hint: str):
    """Around a command's writes: a signal leaves no temporary file and gets ``stopped_hint``; a file that
    cannot be written (disk full, read-only folder) is one line, not a traceback."""
    try:
        yield
    except Stopped as stop:
        stop.hint = stop.hint or stopped_hint
        _remove_own_partials(folder)
        raise
    except OSError as error:
        _remove_own_partials(folder)
        raise FourfoldError(f"cannot write in {folder} ({describe_os_error(error)})") from None


def run_pipeline(study, options: RunOptions) -> Outcome:
    """Run every job of ``study`` not yet done, then write the report from the same store."""
    check_store_url(options.store_url)
    out_dir = Path(options.out_dir)
    resume = f"finished jobs are kept in {out_dir}: rerun the same command to resume"
    with RunLock(out_dir):
        with _writing(out_dir, resume):
            summary = run_study(study, out_dir, workers=options.workers, threads=options.threads,
                                retry_failed=options.retry_failed, timeout_s=options.timeout_s,
                                progress=options.progress, store_url=options.store_url,
                                pool_factory=options.pool_factory, on_start=options.on_start)
        with _writing(out_dir, f"every job is stored; `fourfold report {out_dir}` writes the report"):
            report = write_report(out_dir, study, open_store(out_dir, options.store_url), options.unit,
                                  options.formats, options.figure_style, options.ladder_energy)
    return Outcome(summary, report)


def report_folder(folder, store_url: str | None = None, unit: str = "kj", formats=FORMATS,
                  temperature_k: float | None = None, figure_style: str = "annotated",
                  ladder_energy: str = "E") -> Report:
    """Write the report of a study folder again (another unit, store or temperature) without running anything."""
    from dataclasses import replace

    study = load_folder_study(folder)
    if temperature_k is not None:
        study = replace(study, temperature_k=float(temperature_k))
    store = open_store(folder, store_url)
    with RunLock(Path(folder)), _writing(Path(folder), f"run `fourfold report {folder}` again to write it"):
        return write_report(folder, study, store, unit, formats, figure_style, ladder_energy)


def rebuild_store(folder, store_url: str | None = None) -> str:
    """Make the store of a study folder again from its records (results.db anew, the old file kept aside; for
    PostgreSQL, the rows the server lacks); returns the one line that says what was recovered."""
    folder = Path(folder)
    check_store_url(store_url)
    if not (folder / "recipe.toml").exists() and not RecordShelf(folder).keys():
        raise InputError(f"{folder} is not a fourfold study folder (no recipe.toml, no records): give the --out folder "
                         "of a run")
    with RunLock(folder), _writing(folder, f"nothing was replaced: run `fourfold rebuild {folder}` again"):
        if not store_url:
            return rebuild_sqlite(folder).summary_line()
        store = ResultStore(store_url)
        stored = store.status()
        added = store_records(store, RecordShelf(folder), stored)
        return f"stored {added} results from the records of {folder} in {store.location}; it holds {len(stored)} in all"


def folder_status(folder, store_url: str | None = None) -> dict:
    """Done / failed / pending counts of a study folder's jobs, from its store."""
    return study_status(load_folder_study(folder), open_store(folder, store_url), folder)


def scan(formula: str, level: str = "screen", out_dir=None, relaxations=("held", "free"),
         arrangements=("T-4", "SP-4"), spins=None, workers: int = 2, threads: int = 1) -> ComplexComparison:
    """Every arrangement × isomer × 2S of one complex at one level, run and reported like `fourfold run
    --formula`; returns its ComplexComparison (``.records``: one StateRecord per state and kind)."""
    study = parse_recipe(scan_recipe_text(formula, level, relaxations, arrangements, spins), "scan")
    out_dir = Path(out_dir) if out_dir else Path(tempfile.mkdtemp(prefix="fourfold-scan-"))
    outcome = run_pipeline(study, RunOptions(out_dir, workers=workers, threads=threads))
    return outcome.comparison.complexes[0]
