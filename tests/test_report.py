"""The report of a real screen-level study: table numbers, CSV round trip, LaTeX, figures, structures, CLI.

Two small GFN2-xTB studies are run once for the module: [NiCl4]2- and [NiCl2(PMe3)2] with held relaxations
(through the runner), and [NiCl4]2- with three D2d path points (through `fourfold run`, which must write the
report at its end). Every number the tables show is recomputed here from the stored hartree energies with
the CODATA 2018 factors written out below.
"""

import csv
import json
import math
import shutil
import subprocess

import numpy as np
import pytest

from conftest import run_fourfold as fourfold
from fourfold.compute.xtb_engine import XTB_SPIN_WARNING
from fourfold.study.recipe import parse_recipe
from fourfold.study.runner import run_study
from fourfold.study.store import ResultStore

# CODATA 2018 (Tiesinga et al., Rev. Mod. Phys. 93, 025010, 2021): size of 1 Eh per unit
EH = {"kj": 2625.49963948, "kcal": 627.50947406, "ev": 27.211386245988, "cm": 219474.6313632}
SUFFIX = {"kj": "kj_mol", "kcal": "kcal_mol", "ev": "ev", "cm": "cm-1"}
TETRAHEDRAL_DEG = math.degrees(math.acos(-1.0 / 3.0))  # the ideal tetrahedral angle (common practice, no source)

TWO_COMPLEXES = """
title = "report test"
level = "screen"
relaxations = ["held"]
[run]
max_steps = 12

[[complex]]
formula = "[NiCl4]2-"

[[complex]]
formula = "[NiCl2(PMe3)2]"
"""

PATH = """
title = "path test"
level = "screen"
relaxations = ["held"]
path_points = 3
[run]
max_steps = 25

[[complex]]
formula = "[NiCl4]2-"
"""




@pytest.fixture(scope="module")
def studies(tmp_path_factory):
    from fourfold.pipeline import open_store
    from fourfold.report.render import write_report

    root = tmp_path_factory.mktemp("report")
    pair = root / "pair"
    study = parse_recipe(TWO_COMPLEXES, "pair.toml")
    run_study(study, pair, workers=2)
    report = write_report(pair, study, open_store(pair))
    recipe = root / "path.toml"
    recipe.write_text(PATH)
    path = root / "path"
    ran = fourfold("run", str(recipe), "--out", str(path), "--quiet")
    assert ran.returncode == 0, ran.stderr
    return {"pair": pair, "report": report, "study": study, "path": path, "run_output": ran.stdout}


def _stored_finals(folder):
    """(formula, arrangement, isomer, spin2s, kind) -> (energy_hartree, job_key, result) read from the store."""
    found = {}
    for r in ResultStore(folder / "results.db").results():
        spec = r["spec"]
        if r["final"] and r["status"] == "done":
            found[(spec["formula"], spec["arrangement"], spec["isomer"], spec["spin2s"], spec["kind"],
                   spec.get("trans_angle_deg"))] = r
    return found


def comparison_for_folder(folder, study):
    from fourfold.pipeline import open_store
    from fourfold.verdict.comparison import comparison_from_store

    return comparison_from_store(study, open_store(folder))


def _read_csv(path):
    with open(path, newline="", encoding="utf-8") as handle:
        return list(csv.DictReader(handle))


def test_relative_energies_are_the_stored_hartree_differences_in_every_unit(studies):
    from fourfold.report.tables import states_table

    finals = {k: r for k, r in _stored_finals(studies["pair"]).items() if k[1] != "path"}
    lowest = {}
    for key, r in finals.items():
        lowest[key[0]] = min(lowest.get(key[0], math.inf), r["energy_hartree"])
    comparison = comparison_for_folder(studies["pair"], studies["study"])
    for unit, factor in EH.items():
        rows = states_table(comparison, unit).rows
        assert len(rows) == len(finals) == 10  # 4 states of [NiCl4]2-, 6 of [NiCl2(PMe3)2] (T-4, cis, trans × 2S)
        for row in rows:
            stored = finals[(row["formula"], row["arrangement"], row["isomer"], row["spin2s"], row["relaxation"], None)]
            expected = (stored["energy_hartree"] - lowest[row["formula"]]) * factor
            assert row[f"relative_energy_{SUFFIX[unit]}"] == pytest.approx(expected, rel=1e-9, abs=1e-9 * factor)
            assert row["energy_hartree"] == stored["energy_hartree"]


def test_states_csv_reads_back_to_the_same_numbers(studies):
    finals = _stored_finals(studies["pair"])
    rows = _read_csv(studies["pair"] / "tables" / "states.csv")
    assert {"relative_energy_kj_mol", "estimate_energy_kj_mol", "energy_hartree", "spin2s", "tau4"} <= set(rows[0])
    lowest = {}
    for r in rows:
        lowest[r["formula"]] = min(lowest.get(r["formula"], math.inf), float(r["energy_hartree"]))
    for r in rows:
        stored = finals[(r["formula"], r["arrangement"], r["isomer"], int(r["spin2s"]), r["relaxation"], None)]
        assert float(r["energy_hartree"]) == stored["energy_hartree"]  # full precision survives the text
        assert float(r["relative_energy_kj_mol"]) == pytest.approx(
            (stored["energy_hartree"] - lowest[r["formula"]]) * EH["kj"], rel=1e-9, abs=1e-7)
        assert r["engine"] == "xtb" and XTB_SPIN_WARNING in r["warnings"]
        assert r["converged"] in ("true", "false")


def test_every_tidy_table_round_trips_through_csv(studies):
    from fourfold.report.table import to_csv
    from fourfold.report.tables import study_tables

    for table in (t for t in study_tables(studies["report"].comparison, "kj") if t.tidy):
        text = (studies["pair"] / "tables" / f"{table.name}.csv").read_text(encoding="utf-8")
        assert text == to_csv(table)
        back = list(csv.DictReader(text.splitlines()))
        assert len(back) == len(table.rows)
        for row, read in zip(table.rows, back, strict=False):
            for key, cell in read.items():
                value = row.get(key)
                if isinstance(value, float):
                    assert float(cell) == value
                elif isinstance(value, bool):
                    assert cell == ("true" if value else "false")
                elif value is None:
                    assert cell == ""
                else:
                    assert cell == str(value)


def test_delta_and_summary_follow_from_the_stored_energies(studies):
    finals = {k: r["energy_hartree"] for k, r in _stored_finals(studies["pair"]).items()}
    deltas = _read_csv(studies["pair"] / "tables" / "deltas.csv")
    assert len(deltas) == 4
    for row in deltas:
        f, s = row["formula"], int(row["spin2s"])
        sp = min(e for k, e in finals.items() if k[0] == f and k[1] == "SP-4" and k[3] == s)
        t = min(e for k, e in finals.items() if k[0] == f and k[1] == "T-4" and k[3] == s)
        assert float(row["delta_computed_kj_mol"]) == pytest.approx((sp - t) * EH["kj"], rel=1e-9)
        assert float(row["difference_kj_mol"]) == pytest.approx(
            float(row["delta_computed_kj_mol"]) - float(row["delta_estimated_kj_mol"]), abs=1e-9)
    summary = {r["formula"]: r for r in _read_csv(studies["pair"] / "tables" / "summary.csv")}
    assert set(summary) == {"[NiCl4]2-", "[NiCl2(PMe3)2]"}
    stored = _stored_finals(studies["pair"])
    for formula, row in summary.items():
        mine = {k: e for k, e in finals.items() if k[0] == formula}
        # the verdict leaves out relaxations stopped unconverged (this study caps them at 12 steps)
        usable = {k: e for k, e in mine.items() if stored[k]["converged"]}
        if not usable:
            assert row["computed_ground"] == "" and row["verdict_complete"] == "false"
            continue
        ground = min(usable, key=usable.get)
        assert (row["computed_ground_arrangement"], row["computed_ground_isomer"],
                int(row["computed_ground_spin2s"])) == (ground[1], ground[2], ground[3])
        assert float(row["tau4_ground"]) == stored[ground]["tau4"]
        assert row["verdict_complete"] == ("true" if len(usable) == len(mine) else "false")
        lowest_sp = min(e for k, e in mine.items() if k[1] == "SP-4")
        lowest_t = min(e for k, e in mine.items() if k[1] == "T-4")
        assert float(row["delta_computed_kj_mol"]) == pytest.approx((lowest_sp - lowest_t) * EH["kj"], rel=1e-9)
        agree = (row["computed_ground_arrangement"], row["computed_ground_spin2s"]) == \
                (row["estimated_ground_arrangement"], row["estimated_ground_spin2s"])
        assert row["same_ground"] == ("true" if agree else "false")
    # [NiCl4]2- is tetrahedral with S = 1 (Stucky, Folkers, Kistenmacher, Acta Cryst. 1967, from memory)
    assert (summary["[NiCl4]2-"]["estimated_ground_arrangement"], summary["[NiCl4]2-"]["estimated_ground_spin2s"]) \
        == ("T-4", "2")


def test_markdown_json_and_latex_carry_the_xtb_caveat(studies):
    tables = studies["pair"] / "tables"
    markdown = (tables / "report.md").read_text(encoding="utf-8")
    assert XTB_SPIN_WARNING in markdown and "kJ mol⁻¹" in markdown and "[NiCl₂(PMe₃)₂]" in markdown
    data = json.loads((tables / "report.json").read_text(encoding="utf-8"))
    assert data["energy_unit"] == "kJ/mol" and XTB_SPIN_WARNING in data["warnings"]
    assert len(data["tables"]["states"]) == 10 and {"summary", "deltas", "ligand_field"} <= set(data["tables"])
    for name in ("summary", "deltas", "states_NiCl4_2-", "states_NiCl2PMe32"):
        tex = (tables / f"{name}.tex").read_text(encoding="utf-8")
        # booktabs rules, no siunitx (a fourfold default); pdflatex needs plain ASCII input
        assert all(rule in tex for rule in (r"\toprule", r"\midrule", r"\bottomrule")) and "siunitx" not in tex
        assert tex.isascii() and XTB_SPIN_WARNING in tex
        # "\\" and \midrule take an optional [argument]: no row may open with "[" (L. Lamport, LaTeX: A Document
        # Preparation System, 2nd ed. 1994, and the booktabs manual, S. Fear; from memory)
        assert not any(line.startswith("[") for line in tex.splitlines())


def test_latex_compiles(studies, tmp_path):
    engine = shutil.which("pdflatex") or shutil.which("lualatex") or shutil.which("xelatex")
    if engine is None:
        pytest.skip("no TeX engine installed")
    for path in (studies["pair"] / "tables").glob("*.tex"):
        shutil.copy(path, tmp_path)
    done = subprocess.run([engine, "-interaction=nonstopmode", "-halt-on-error", "report.tex"], cwd=tmp_path,
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stdout[-2000:]
    assert (tmp_path / "report.pdf").stat().st_size > 1000


EXPECTED_FIGURES = ("ladder_NiCl4_2-", "ladder_NiCl2PMe32", "d_levels_NiCl4_2-", "d_levels_NiCl2PMe32", "parity")


def test_every_figure_file_is_written_at_print_resolution(studies):
    from PIL import Image

    folder = studies["pair"] / "figures"
    assert {p.stem for p in folder.iterdir()} == set(EXPECTED_FIGURES)
    for name in EXPECTED_FIGURES:
        assert (folder / f"{name}.pdf").read_bytes()[:5] == b"%PDF-"
        assert b"<svg" in (folder / f"{name}.svg").read_bytes()[:2000]
        with Image.open(folder / f"{name}.png") as image:
            # 300 dpi, one journal column (85 mm) or two (178 mm) wide: common practice, no source
            assert image.info["dpi"] == pytest.approx((300, 300), abs=0.5)
            columns_mm = 178 if name.startswith("d_levels") else 85
            assert image.width <= columns_mm / 25.4 * 300 + 2
    assert (folder / "ladder_NiCl4_2-.png").stat().st_size > 10_000


def _texts_overlap(fig):
    renderer = fig.canvas.get_renderer()
    fig.canvas.draw()
    clashes = []
    for ax in fig.axes:
        boxes = [(t.get_text(), t.get_window_extent(renderer)) for t in ax.texts if t.get_text().strip()]
        for i, (a, box_a) in enumerate(boxes):
            for b, box_b in boxes[i + 1:]:
                if box_a.overlaps(box_b):
                    clashes.append((a, b))
    return clashes


def test_figures_have_units_on_their_axes_and_the_stored_numbers(studies):
    from fourfold.report import figures

    comparison = studies["report"].comparison
    finals = {k: r["energy_hartree"] for k, r in _stored_finals(studies["pair"]).items()}
    for c in comparison.complexes:
        ladder = figures.ladder_figure(c, "kcal")
        assert ladder.axes[0].get_ylabel() == "relative energy / kcal mol⁻¹"
        lowest = min(e for k, e in finals.items() if k[0] == c.formula)
        for line in ladder.axes[0].lines:
            gid = line.get_gid() or ""
            if gid.startswith("calc:"):
                _, state, spin = gid.split(":")
                arrangement, _, isomer = state.partition(" ")
                stored = finals[(c.formula, arrangement, isomer, int(spin), "held", None)]
                assert line.get_ydata()[0] == pytest.approx((stored - lowest) * EH["kcal"], rel=1e-9, abs=1e-9)
        assert not _texts_overlap(ladder)
        levels = figures.d_levels_figure(c)
        assert levels.axes[0].get_ylabel() == "d-orbital energy / 10³ cm⁻¹"
        assert [t.get_text() for t in levels.axes[0].get_xticklabels()] == ["AOM est."]
        assert not _texts_overlap(levels)
    parity = figures.parity_figure(comparison, "ev")
    ax = parity.axes[0]
    assert ax.get_xlabel() == "ΔE(SP-4 − T-4), estimate / eV" and ax.get_ylabel() == "ΔE(SP-4 − T-4), computed / eV"
    points = {round(float(line.get_ydata()[0]), 9) for line in ax.lines if line.get_gid() == "parity-point"}
    expected = set()
    for c in comparison.complexes:
        mine = {k: e for k, e in finals.items() if k[0] == c.formula}
        sp = min(e for k, e in mine.items() if k[1] == "SP-4")
        t = min(e for k, e in mine.items() if k[1] == "T-4")
        expected.add(round((sp - t) * EH["ev"], 9))
    assert points == expected
    assert {t.get_text() for t in ax.texts} >= {"[NiCl₄]²⁻", "[NiCl₂(PMe₃)₂]"}
    assert not _texts_overlap(parity)


def test_run_writes_the_report_and_the_path_figure_marks_the_spin_crossing(studies):
    from fourfold.report import figures
    from fourfold.study.recipe import load_recipe

    folder = studies["path"]
    assert "report:" in studies["run_output"]
    assert {"path.csv", "summary.csv", "report.md", "report.json"} <= {p.name for p in (folder / "tables").iterdir()}
    for extension in ("pdf", "svg", "png"):
        assert (folder / "figures" / f"path_NiCl4_2-.{extension}").stat().st_size > 1000
    from PIL import Image

    with Image.open(folder / "figures" / "path_NiCl4_2-.png") as image:
        assert image.width <= 85 / 25.4 * 300 + 2  # one journal column at 300 dpi (common practice, no source)
    rows = _read_csv(folder / "tables" / "path.csv")
    angles = sorted({float(r["trans_angle_deg"]) for r in rows})
    assert len(rows) == 6 and angles == pytest.approx([TETRAHEDRAL_DEG, (TETRAHEDRAL_DEG + 180) / 2, 180.0], abs=1e-5)
    # crossings recomputed: where E(singlet) − E(triplet) changes sign between neighbouring angles, linearly
    energy = {(round(float(r["trans_angle_deg"]), 4), int(r["spin2s"])): float(r["energy_hartree"]) for r in rows}
    expected = []
    for left, right in zip(angles, angles[1:], strict=False):
        d0 = energy[(round(left, 4), 0)] - energy[(round(left, 4), 2)]
        d1 = energy[(round(right, 4), 0)] - energy[(round(right, 4), 2)]
        if d0 * d1 < 0:
            expected.append(left + d0 / (d0 - d1) * (right - left))
    comparison = comparison_for_folder(folder, load_recipe(folder / "recipe.toml"))
    fig = figures.path_figure(comparison.complexes[0], "kj")
    ax = fig.axes[0]
    assert ax.get_xlabel() == "trans L–M–L angle / °" and ax.get_ylabel() == "relative energy / kJ mol⁻¹"
    marked = [float(line.get_xdata()[0]) for line in ax.lines if line.get_gid() == "spin-crossing"]
    assert marked == pytest.approx(expected)
    assert not _texts_overlap(fig)


def test_structures_carry_energy_spin_and_arrangement(studies):
    from ase.io import read

    finals = _stored_finals(studies["pair"])
    files = sorted((studies["pair"] / "structures").glob("*.xyz"))
    assert len(files) == 10
    for path in files:
        atoms = read(path, format="extxyz")
        info = atoms.info
        stored = finals[(info["formula"], info["arrangement"], info.get("isomer", ""), info["spin2s"],
                         info["relaxation"], None)]
        assert info["energy_hartree"] == pytest.approx(stored["energy_hartree"], abs=1e-12)
        assert info["multiplicity"] == info["spin2s"] + 1 and info["caveat"] == XTB_SPIN_WARNING
        assert np.allclose(atoms.get_positions(), stored["positions_angstrom"], atol=1e-8)


def test_report_command_units_formats_and_errors(studies, tmp_path):
    copy = tmp_path / "copy"
    copy.mkdir()
    for name in ("results.db", "recipe.toml"):
        shutil.copy(studies["pair"] / name, copy / name)
    done = fourfold("report", str(copy), "--units", "kcal", "--format", "csv", "--format", "json")
    assert done.returncode == 0, done.stderr
    assert "kcal mol⁻¹" in done.stdout and "Summary" in done.stdout and XTB_SPIN_WARNING in done.stdout
    names = {p.name for p in (copy / "tables").iterdir()}
    assert "summary.csv" in names and "report.json" in names and not any(n.endswith((".md", ".tex")) for n in names)
    summary = _read_csv(copy / "tables" / "summary.csv")
    reference = {r["formula"]: r for r in _read_csv(studies["pair"] / "tables" / "summary.csv")}
    for row in summary:
        kj = float(reference[row["formula"]]["delta_computed_kj_mol"])
        assert float(row["delta_computed_kcal_mol"]) == pytest.approx(kj * EH["kcal"] / EH["kj"], rel=1e-9)
    assert json.loads((copy / "tables" / "report.json").read_text(encoding="utf-8"))["energy_unit"] == "kcal/mol"
    bad_unit = fourfold("report", str(copy), "--units", "furlong")
    assert bad_unit.returncode == 2 and "furlong" in bad_unit.stderr
    empty = tmp_path / "empty"
    empty.mkdir()
    not_a_study = fourfold("report", str(empty))
    assert not_a_study.returncode == 2 and "not a fourfold study folder" in not_a_study.stderr


def test_formula_markup():
    from fourfold.chem.notation import formula_slug as slug
    from fourfold.report.markup import formula_latex, formula_unicode
    from fourfold.report.table import tex_escape

    # counts as subscripts, charge as superscript with a true minus (IUPAC Red Book 2005 IR-4; from memory)
    assert formula_unicode("[NiCl2(PMe3)2]") == "[NiCl₂(PMe₃)₂]"
    assert formula_unicode("[NiCl4]2-") == "[NiCl₄]²⁻"
    assert formula_latex("[Ni(CN)4]2-") == "[Ni(CN)$_{4}$]$^{2-}$"
    assert slug("[Ni(CN)4]2-") == "NiCN4_2-"
    # LaTeX's ten special characters (L. Lamport, LaTeX: A Document Preparation System, 2nd ed. 1994; from memory)
    assert tex_escape("50% & $x_1$ #2 {a}") == r"50\% \& \$x\_1\$ \#2 \{a\}"


def test_journal_report_writes_captions_for_every_figure_and_table(studies, tmp_path):
    from fourfold.errors import InputError
    from fourfold.pipeline import open_store
    from fourfold.report.render import write_report
    from fourfold.report.tables import study_tables

    report = write_report(tmp_path / "journal", studies["study"], open_store(studies["pair"]), figure_style="journal")
    captions = (tmp_path / "journal" / "tables" / "captions.md").read_text(encoding="utf-8")
    figures = sorted({p.stem for p in report.figures})
    assert figures == sorted(EXPECTED_FIGURES)
    assert all(f"**Figure `{name}`.**" in captions for name in figures)
    assert captions.count("**Table `") == len(study_tables(report.comparison, "kj"))
    # what the annotated figures print as notes is in the captions: the xTB caveat, in Unicode typography
    assert "GFN2-xTB energies: spin-state gaps are a screen only" in captions and "[NiCl₄]²⁻" in captions
    with pytest.raises(InputError):
        write_report(tmp_path / "bad", studies["study"], open_store(studies["pair"]), figure_style="poster")
