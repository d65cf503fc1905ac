"""Command line: parses, calls the API, prints. Heavy imports happen inside the commands, so
``fourfold --help`` starts without PySCF, matplotlib or ase.db."""

from __future__ import annotations

import json
import sys

import click

from .errors import FourfoldError, InputError

ARRANGEMENT_CHOICES = ("T-4", "SP-4", "SS-4", "vTBPY-4")


class _Group(click.Group):
    """Turns fourfold's own errors into one line on stderr and exit status 2 (no traceback)."""

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


@main.command()
@click.argument("formula")
@click.option("--arrangement", "-a", "arrangements", multiple=True, type=click.Choice(ARRANGEMENT_CHOICES),
              help="Arrangement to estimate (repeatable); default T-4 and SP-4.")
@click.option("--set", "overrides", multiple=True, metavar="KEY=VALUE",
              help="Override a parameter: LIGAND.e_sigma, LIGAND.e_pi (cm-1), LIGAND.f, LIGAND.pi_ratio, LIGAND.h, "
                   "LIGAND.repulsion (cm-1), metal.B, metal.C (cm-1), metal.g (kK), metal.k, e_ds_ratio, e_scale.")
@click.option("--spin", "spins", multiple=True, type=int, metavar="2S",
              help="Spin state as 2S (number of unpaired electrons; repeatable); default all allowed.")
@click.option("--json", "as_json", is_flag=True, help="Print the estimate as JSON.")
def estimate(formula, arrangements, overrides, spins, as_json):
    """Ligand-field estimate for FORMULA, e.g. '[NiCl4]2-' (quote it in the shell)."""
    from .field.estimate import DEFAULT_ARRANGEMENTS, estimate as run_estimate, parse_overrides
    from .report.text import estimate_text

    cx = _load_complex(formula)
    result = run_estimate(cx, arrangements or DEFAULT_ARRANGEMENTS, parse_overrides(overrides), spins=spins or None)
    if as_json:
        click.echo(json.dumps(result.as_dict(), indent=2, ensure_ascii=False))
    else:
        click.echo(estimate_text(result))


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
    if as_json:
        click.echo(json.dumps({"formula": cx.formula, "structures": rows}, indent=2, ensure_ascii=False))
    else:
        click.echo(structures_text(cx, rows))


if __name__ == "__main__":  # pragma: no cover
    main()
