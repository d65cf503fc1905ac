"""Command line: parses, calls the API, prints. Heavy imports happen inside the commands, so
``fourfold --help`` starts without PySCF, matplotlib or ase.db."""

from __future__ import annotations

import json
import sys

import click

from .errors import FourfoldError, InputError
from .geometry.polyhedra import ARRANGEMENTS as ARRANGEMENT_CHOICES  # numpy only: --help stays quick


class _Group(click.Group):
    """Turns fourfold's own errors and click's usage errors into one line on stderr and exit status 2."""

    def main(self, args=None, prog_name=None, **extra):
        from .study.stopping import Stopped, install_handlers

        install_handlers()  # first thing: SIGINT, SIGTERM and SIGHUP stop every phase the same way
        try:
            code = super().main(args=args, prog_name=prog_name, standalone_mode=False, **extra)
        except Stopped as stop:
            click.echo(f"stopped by {stop.signal_name}" + (f"; {stop.hint}" if stop.hint else " before anything "
                       "was written"), err=True)
            sys.exit(stop.exit_status)
        except click.UsageError as error:
            where = f" (see '{error.ctx.command_path} --help')" if error.ctx else ""
            click.echo(f"error: {error.format_message()}{where}", err=True)
            sys.exit(2)
        except click.ClickException as error:
            click.echo(f"error: {error.format_message()}", err=True)
            sys.exit(error.exit_code)
        except click.Abort:
            click.echo("stopped", err=True)
            sys.exit(130)
        sys.exit(code if isinstance(code, int) else 0)

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except InputError as error:
            click.echo(f"error: {error}", err=True)
            sys.exit(2)
        except FourfoldError as error:
            click.echo(f"error: {error}", err=True)
            sys.exit(1)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(package_name="fourfold")
def main():
    """fourfold: tetrahedral or square planar, and in which spin state?

    Builds ideal four-coordinate structures, sets the ligand-field estimate beside a real calculation
    (PySCF DFT, GFN2-xTB for screening) and reports the energy differences.
    """


def _load_complex(formula: str):
    from .chem.complex import complex_from_formula

    return complex_from_formula(formula)


def _print_cautions(complexes) -> None:
    """The safety cautions for the compounds in hand, once, on stderr (stdout stays data), printed once the
    input is known to be good so that a mistake still gets its one-line error."""
    from .chem.hazards import cautions_text

    click.echo(cautions_text(list(complexes)), err=True, nl=False)


@main.command()
@click.argument("formula")
@click.option("--arrangement", "-a", "arrangements", multiple=True, type=click.Choice(ARRANGEMENT_CHOICES),
              help="Arrangement to estimate (repeatable); default T-4 and SP-4.")
@click.option("--set", "overrides", multiple=True, metavar="KEY=VALUE",
              help="Override a parameter: LIGAND.e_sigma, LIGAND.e_pi (cm-1), LIGAND.f, LIGAND.pi_ratio, LIGAND.h, "
                   "LIGAND.cone (degrees), metal.B, metal.C (cm-1), metal.g (kK), metal.k, e_ds_ratio, e_scale, "
                   "steric_scale, steric_exponent, screening.")
@click.option("--spin", "spins", multiple=True, type=int, metavar="2S",
              help="Spin state as 2S (number of unpaired electrons; repeatable); default all allowed.")
@click.option("--json", "as_json", is_flag=True, help="Print the estimate as JSON.")
def estimate(formula, arrangements, overrides, spins, as_json):
    """Ligand-field estimate for FORMULA such as '[NiCl4]2-' (quote it in the shell)."""
    from .field.estimate import DEFAULT_ARRANGEMENTS, parse_overrides
    from .field.estimate import estimate as run_estimate
    from .report.text import estimate_text

    cx = _load_complex(formula)
    result = run_estimate(cx, arrangements or DEFAULT_ARRANGEMENTS, parse_overrides(overrides), spins=spins or None)
    _print_cautions([cx])
    if as_json:
        click.echo(json.dumps(result.as_dict(), indent=2, ensure_ascii=False))
    else:
        from .chem.notation import charge_written

        click.echo(estimate_text(result, cx, charge_assumed=not charge_written(formula)))


@main.command()
@click.argument("formula")
@click.option("--arrangement", "-a", "arrangements", multiple=True, type=click.Choice(ARRANGEMENT_CHOICES),
              help="Arrangement to build (repeatable); default all four.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default="outputs/structures", show_default=True,
              help="Folder for the extended XYZ files.")
@click.option("--json", "as_json", is_flag=True, help="Print the table as JSON.")
def build(formula, arrangements, out_dir, as_json):
    """Ideal structures of FORMULA (every arrangement and isomer) as extended XYZ, with shape indices."""
    from .geometry.builder import build_all
    from .report.export import write_ideal_structures
    from .report.text import structures_text

    cx = _load_complex(formula)
    rows = write_ideal_structures(build_all(cx, arrangements or ARRANGEMENT_CHOICES), out_dir)
    _print_cautions([cx])
    if as_json:
        click.echo(json.dumps({"formula": cx.formula, "structures": rows}, indent=2, ensure_ascii=False))
    else:
        click.echo(structures_text(cx, rows))


def _progress_printer(quiet: bool):
    """A rich progress bar on stderr (jobs done/failed/remaining, elapsed, time left), or nothing."""
    if quiet:
        return None, None
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn, TimeRemainingColumn

    progress = Progress(TextColumn("[bold]{task.description}"), BarColumn(), MofNCompleteColumn(),
                        TextColumn("{task.fields[counts]}"), TimeElapsedColumn(), TextColumn("left"),
                        TimeRemainingColumn(), console=Console(stderr=True), transient=False)
    task = progress.add_task("jobs", total=None, counts="")

    def update(summary, running):
        progress.update(task, total=summary.total, completed=summary.done + summary.failed,
                        counts=f"done {summary.done} · failed {summary.failed} · running {len(running)}")

    return progress, update


def _run_and_print(study, out_dir, options: dict, as_json: bool, single: bool = False):
    """Run the pipeline with a progress bar, then print the comparison (or its JSON) and where the files went."""
    from .pipeline import RunOptions, run_pipeline
    from .report.text import comparison_text, run_summary_text

    progress, update = _progress_printer(options.pop("quiet") or as_json)
    run_options = RunOptions(out_dir=out_dir, progress=update, **options,
                             on_start=lambda: _print_cautions(e.complex for e in study.complexes))
    if progress:
        with progress:
            outcome = run_pipeline(study, run_options)
    else:
        outcome = run_pipeline(study, run_options)
    if as_json:
        data = outcome.comparison.as_dict()
        click.echo(json.dumps(data["complexes"][0] if single else data, indent=2, ensure_ascii=False))
    else:
        click.echo(comparison_text(outcome.comparison))
        click.echo(run_summary_text(outcome.summary, out_dir))
    click.echo(outcome.report.summary_line(), err=as_json)


_RUN_OPTIONS = [
    click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
                 help="Study folder (default outputs/<recipe name>)."),
    click.option("--workers", type=int, default=2, show_default=True,
                 help="Jobs run side by side, each in its own process."),
    click.option("--threads", type=int, default=1, show_default=True, help="Threads per job."),
    click.option("--retry-failed", is_flag=True, help="Run again the jobs that failed before."),
    click.option("--timeout", "timeout_s", type=float, default=None,
                 help="Per-job time limit in seconds (default: recipe [run] timeout_s, else 3600)."),
    click.option("--quiet", is_flag=True, help="No progress bar (for cron or batch systems)."),
    click.option("--json", "as_json", is_flag=True, help="Print the comparison as JSON."),
    click.option("--temperature", "temperature_k", type=click.FloatRange(min=0, min_open=True), default=None,
                 help="Temperature of the free energies in K (default: the recipe's temperature_k, else 298.15)."),
    click.option("--figures", "figure_style", type=click.Choice(("annotated", "journal")), default="annotated",
                 show_default=True, help="Figure style: journal figures carry no title or caveats (see captions.md)."),
]


def _with_run_options(function):
    for option in reversed(_RUN_OPTIONS):
        function = option(function)
    return function


@main.command()
@click.argument("recipe", required=False, type=click.Path(dir_okay=False))
@click.option("--formula", help="Run one complex without a recipe, e.g. '[NiCl4]2-'.")
@click.option("--level", default="screen", show_default=True, help="Level for --formula: screen, quick or standard.")
@_with_run_options
@click.option("--scheduler", metavar="tcp://HOST:PORT",
              help="Run the jobs on the Dask scheduler there (its workers replace --workers; extra: cluster).")
@click.option("--cluster", "cluster_kind", type=click.Choice(["slurm", "pbs"]),
              help="Start Dask workers as SLURM or PBS batch jobs sized by the recipe's [cluster] table.")
@click.option("--cluster-config", type=click.Path(dir_okay=False),
              help="A TOML file with the [cluster] table (cores, memory, walltime, queue, account, jobs) to use "
                   "instead of the recipe's.")
@click.option("--store", "store_url", metavar="postgresql://USER@HOST:PORT/DB",
              help="Keep the results in PostgreSQL instead of results.db in the study folder (extra: postgres).")
def run(recipe, formula, level, out_dir, workers, threads, retry_failed, timeout_s, quiet, as_json, temperature_k,
        figure_style, scheduler, cluster_kind, cluster_config, store_url):
    """Run the study in RECIPE (a .toml file), or every state of one --formula; then print the comparison.

    Rerunning the same command resumes: finished jobs are never recomputed."""
    from pathlib import Path

    from .chem.notation import formula_slug
    from .pipeline import check_store_url
    from .study.recipe import load_recipe, recipe_for_formula

    if bool(recipe) == bool(formula):
        raise InputError("give either a RECIPE file or --formula FORMULA (with --level), not both or neither")
    check_store_url(store_url)
    study = load_recipe(recipe) if recipe else recipe_for_formula(formula, level)
    study = _at_temperature(study, temperature_k)
    default_name = Path(recipe).stem if recipe else f"{formula_slug(study.complexes[0].complex.formula)}_{level}"
    pool = _cluster_pool(study, threads, scheduler, cluster_kind, cluster_config)
    _run_and_print(study, out_dir or Path("outputs") / default_name,
                   dict(workers=workers, threads=threads, retry_failed=retry_failed, timeout_s=timeout_s,
                        quiet=quiet, store_url=store_url, pool_factory=pool, figure_style=figure_style), as_json,
                   single=bool(formula))


def _at_temperature(study, temperature_k):
    from dataclasses import replace

    return study if temperature_k is None else replace(study, temperature_k=float(temperature_k))


def _cluster_pool(study, threads, scheduler, cluster_kind, cluster_config):
    """The executor for --scheduler / --cluster (None: the local pool). Dask is imported only when used."""
    if scheduler and cluster_kind:
        raise InputError("give --scheduler (a running Dask scheduler) or --cluster (start one), not both")
    if cluster_config and not cluster_kind:
        raise InputError("--cluster-config sizes batch jobs: add --cluster slurm or --cluster pbs")
    if not (scheduler or cluster_kind):
        return None
    from .study.cluster import load_cluster_file, pool_factory

    settings = None
    if cluster_kind:
        settings = load_cluster_file(cluster_config) if cluster_config else study.cluster
        if not settings:
            raise InputError(f"--cluster {cluster_kind} needs a [cluster] table (cores, memory, walltime): add one to "
                             "the recipe or give --cluster-config FILE")
    return pool_factory(threads, scheduler=scheduler, cluster_kind=cluster_kind, cluster_settings=settings)


@main.command()
@click.option("--level", default=None, help="Run the demo at another level (e.g. screen: the whole pipeline in "
                                           "minutes, xTB energies only). Default: the recipe's quick.")
@_with_run_options
def demo(level, out_dir, workers, threads, retry_failed, timeout_s, quiet, as_json, temperature_k, figure_style):
    """Run the bundled demo study (three nickel(II) complexes at the quick level) into outputs/demo."""
    from importlib import resources
    from pathlib import Path

    from .study.recipe import parse_recipe

    text = resources.files("fourfold").joinpath("recipes/demo.toml").read_text(encoding="utf-8")
    study = _at_temperature(parse_recipe(text, "demo.toml"), temperature_k)
    if level:
        study = study.with_level(level)  # the folder's recipe.toml is written from the study: it says what ran
        out_dir = out_dir or Path("outputs") / f"demo-{study.level.name}"
    _run_and_print(study, out_dir or Path("outputs") / "demo",
                   dict(workers=workers, threads=threads, retry_failed=retry_failed, timeout_s=timeout_s, quiet=quiet,
                        figure_style=figure_style), as_json)


_STORE_OPTION = click.option("--store", "store_url", metavar="postgresql://USER@HOST:PORT/DB",
                             help="Read the results from this PostgreSQL store (the one the run used) instead of "
                                  "FOLDER/results.db.")


@main.command()
@click.argument("folder", type=click.Path(file_okay=False, exists=True))
@click.option("--units", "unit", type=click.Choice(("kj", "kcal", "ev", "cm"), case_sensitive=False), default="kj",
              show_default=True, help="Energy unit of the tables and figures (kJ/mol, kcal/mol, eV, cm-1).")
@click.option("--format", "formats", multiple=True, type=click.Choice(("csv", "md", "tex", "json")),
              help="Table format to write (repeatable; default all). Figures and structures are always written.")
@click.option("--temperature", "temperature_k", type=click.FloatRange(min=0, min_open=True), default=None,
              help="Temperature of the free energies in K (default: the one the study ran with).")
@click.option("--figures", "figure_style", type=click.Choice(("annotated", "journal")), default="annotated",
              show_default=True, help="Figure style: journal figures carry no title or caveats (see captions.md).")
@click.option("--ladder", "ladder_energy", type=click.Choice(("E", "G")), default="E", show_default=True,
              help="What the spin-ladder figures show: electronic energies E, or free energies G(T) of the free minima.")
@_STORE_OPTION
def report(folder, unit, formats, temperature_k, figure_style, ladder_energy, store_url):
    """Tables, figures and extended XYZ structures of a study FOLDER, from its store; prints the summary.

    Writes FOLDER/tables, FOLDER/figures (PDF, SVG, 300 dpi PNG) and FOLDER/structures."""
    from .pipeline import report_folder
    from .report.text import report_text
    from .study.recipe import load_folder_study

    written = report_folder(folder, store_url, unit=unit.lower(), formats=formats or ("csv", "md", "tex", "json"),
                            temperature_k=temperature_k, figure_style=figure_style, ladder_energy=ladder_energy)
    _print_cautions(e.complex for e in load_folder_study(folder).complexes)
    click.echo(report_text(written), nl=False)


@main.command()
@click.argument("folder", type=click.Path(file_okay=False, exists=True))
@_STORE_OPTION
def rebuild(folder, store_url):
    """Make the store of a study FOLDER again from the records its finished jobs left in FOLDER/records.

    A damaged results.db is kept aside (renamed), never deleted. With --store, the PostgreSQL store gets the
    results it lacks."""
    from .pipeline import rebuild_store

    click.echo(rebuild_store(folder, store_url))


@main.command()
@click.argument("folder", type=click.Path(file_okay=False, exists=True))
@click.option("--json", "as_json", is_flag=True, help="Print the counts as JSON.")
@_STORE_OPTION
def status(folder, as_json, store_url):
    """Done / failed / pending jobs of a study FOLDER, with the failures' one-line reasons."""
    from .pipeline import folder_status
    from .report.text import status_text

    found = folder_status(folder, store_url)
    if as_json:
        click.echo(json.dumps(found, indent=2, ensure_ascii=False))
    else:
        click.echo(status_text(found))


@main.command()
@click.argument("name", required=False)
@click.option("--json", "as_json", is_flag=True, help="Print as JSON.")
def ligands(name, as_json):
    """List the ligand library, or one ligand NAME (a name or alias, e.g. 'P(t-Bu)3'): formula, denticity,
    donors, charge, e_σ/e_π with sources, cone angle (computed, and Tolman's where published), bite angle."""
    from .field.ligand_library import ligand_entry, ligand_table
    from .report.text import ligands_text

    rows = [ligand_entry(name)] if name else ligand_table()
    if as_json:
        click.echo(json.dumps(rows[0] if name else rows, indent=2, ensure_ascii=False))
    else:
        click.echo(ligands_text(rows))


if __name__ == "__main__":  # pragma: no cover
    main()
