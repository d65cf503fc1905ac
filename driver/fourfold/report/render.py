"""A study folder's report, written from its store: tables/, figures/ and structures/.

    tables/      summary, deltas, states, ligand_field, path (.csv, tidy); report.md; one .tex per table and a
                 report.tex that inputs them all; report.json; methods.md and methods.tex (with the md and tex formats)
                 and references.bib (fourfold.report.methods); captions.md (one caption per figure and table)
    figures/     ladder_<complex>, d_levels_<complex>, path_<complex> (with path points), parity; each as .pdf,
                 .svg and 300 dpi .png
    structures/  the final structure of every finished state as extended XYZ (energy, 2S, arrangement, … in
                 the comment line)

It can be written again at any time (`fourfold report DIR`); every file is replaced whole.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path

from ..errors import InputError
from ..units import REPORT_UNITS, energy_unit
from . import tables as tab
from .table import latex_document, to_csv, to_latex


@dataclass
class Report:
    folder: Path
    unit: str
    comparison: object
    tables: list[Path] = field(default_factory=list)
    figures: list[Path] = field(default_factory=list)
    structures: list[Path] = field(default_factory=list)

    def summary_line(self) -> str:
        return (f"report: {len(self.tables)} table files in {self.folder / 'tables'}, {len(self.figures)} figure files "
                f"in {self.folder / 'figures'}, {len(self.structures)} structures in {self.folder / 'structures'}")


def _write_text(path: Path, text: str) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    partial = path.with_name(f".{path.name}.{os.getpid()}.partial")  # unique: two writers never share one
    partial.write_text(text, encoding="utf-8")
    os.replace(partial, path)
    return path


def write_tables(comparison, folder: Path, unit: str, formats=tab.FORMATS, safety_markdown: str = "") -> list[Path]:
    tables = tab.study_tables(comparison, unit)
    written = []
    if "csv" in formats:
        written += [_write_text(folder / f"{t.name}.csv", to_csv(t)) for t in tables if t.tidy]
    shown = [t for t in tables if t.display]
    if "md" in formats:
        written.append(_write_text(folder / "report.md", tab.markdown_report(shown, comparison, unit, safety_markdown)))
    if "tex" in formats:
        written += [_write_text(folder / f"{t.name}.tex", to_latex(t)) for t in shown]
        written.append(_write_text(folder / "report.tex",
                                   latex_document(shown, comparison.title, [t.name for t in shown])))
    if "json" in formats:
        written.append(_write_text(folder / "report.json", tab.to_json(tables, comparison, unit)))
    return written


def write_figures(comparison, folder: Path, unit: str, figure_style: str = "annotated",
                  ladder_energy: str = "E") -> list[Path]:
    from .figures import save_figure, study_figures

    written = []
    for name, fig in study_figures(comparison, unit, figure_style, ladder_energy).items():
        written += save_figure(fig, folder / name)
    return written


def write_structures(comparison, results_by_key: dict, folder: Path, unit: str) -> list[Path]:
    """Final structure of every finished state, its numbers in the extended XYZ comment line."""
    from ase import Atoms

    from ..compute.xtb_engine import XTB_SPIN_WARNING
    from .export import structure_filename, write_extxyz

    u = energy_unit(unit)
    written = []
    for c in comparison.complexes:
        for r in c.records:
            result = results_by_key.get(r.job_key)
            if r.status != "done" or result is None or r.energy_hartree is None:
                continue
            atoms = Atoms(symbols=result["symbols"], positions=result["positions_angstrom"])
            atoms.info.update({
                "formula": c.formula, "arrangement": r.arrangement, "isomer": r.isomer, "spin2s": r.spin2s,
                "multiplicity": r.spin2s + 1, "relaxation": r.kind, "energy_hartree": r.energy_hartree,
                f"relative_energy_{u.suffix}": u.from_kj_mol(r.relative_kj_mol),
                "level": c.level, "engine": r.engine, "converged": bool(r.converged),
                "tau4": r.tau4, "nearest_shape": r.nearest_shape, "job_key": r.job_key,
            })
            if r.engine == "xtb":
                atoms.info["caveat"] = XTB_SPIN_WARNING
            # ASE writes an empty string as `key=` and reads it back as the next pair: leave empty values out
            atoms.info = {k: v for k, v in atoms.info.items() if v is not None and v != ""}
            name = structure_filename(atoms, suffix=f"2S{r.spin2s}_{r.kind}")
            written.append(write_extxyz(atoms, folder / name))
    return written


def write_report(folder, study, store, unit: str = "kj", formats=tab.FORMATS,
                 figure_style: str = "annotated", ladder_energy: str = "E") -> Report:
    """Write tables, figures and structures of ``study`` into ``folder`` from the results in ``store`` (a
    fourfold.study.store.ResultStore: the folder's results.db or a PostgreSQL store); figures in
    ``figure_style`` (annotated or journal), their captions and the tables' in tables/captions.md."""
    from ..verdict.comparison import build_comparison
    from .captions import captions_markdown
    from .figures import check_style

    folder = Path(folder)
    unit = energy_unit(unit).name
    if unit not in {energy_unit(u).name for u in REPORT_UNITS}:
        raise InputError(f"report units must be one of {', '.join(REPORT_UNITS)}, got {energy_unit(unit).label}")
    unknown = [f for f in formats if f not in tab.FORMATS]
    if unknown:
        raise InputError(f"unknown table format {unknown[0]!r}: use {', '.join(tab.FORMATS)}")
    check_style(figure_style)
    results = {r["job_key"]: r for r in store.results()}
    comparison = build_comparison(study, results)
    report = Report(folder, unit, comparison)
    from ..chem.hazards import cautions_markdown

    safety = cautions_markdown([e.complex for e in study.complexes], heading="## Safety")
    report.tables = write_tables(comparison, folder / "tables", unit, formats, safety)
    from .methods import methods_files, study_versions

    methods = methods_files(study, study_versions(folder), comparison, safety, formats)
    report.tables += [_write_text(folder / "tables" / name, text) for name, text in methods.items()]
    report.figures = write_figures(comparison, folder / "figures", unit, figure_style, ladder_energy)
    if "md" in formats:
        names = list(dict.fromkeys(p.stem for p in report.figures))
        captions = captions_markdown(comparison, names, tab.study_tables(comparison, unit), unit)
        report.tables.append(_write_text(folder / "tables" / "captions.md", captions))
    report.structures = write_structures(comparison, results, folder / "structures", unit)
    return report
