"""Bad input, generated and hand-made: every mistake is one InputError line, never a traceback.

Property-based (hypothesis): random strings and structured near-recipes into the formula parser, the
recipe loader and the override parser. By hand: custom ligands with NaN, infinite or overlapping
coordinates, donor indices out of range, 10 MB files, and titles that try to leave the study folder or
break the Markdown, LaTeX and CSV they are written into.
"""

from __future__ import annotations

import csv
import io
import math
import tomllib

import pytest
import tomli_w
from faultkit import EXAMPLES, check_clean, command, fault, fourfold, note, one_line
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from fourfold.chem.complex import complex_from_formula
from fourfold.errors import InputError
from fourfold.field.estimate import parse_overrides
from fourfold.study.jobs import expand
from fourfold.study.recipe import parse_recipe

SETTINGS = settings(max_examples=EXAMPLES, deadline=None, database=None,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much])


def _refused_cleanly(call, what: str):
    """``call()`` either works or raises an InputError whose message is one printable line; anything else is
    a traceback the user would see (counted, then raised)."""
    note("bad_input", 1, what)
    try:
        return call()
    except InputError as error:
        message = str(error)
        assert message.isprintable() and len(message) < 2000, repr(message[:300])
        return None
    except Exception:
        note("traceback", 1, what)
        raise


# ------------------------------------------------------------------------------------------ formulas

FORMULA_PIECES = st.sampled_from(
    list("[]()0123456789+-^ ") + ["Ni", "Cl", "Br", "Pd", "Zn", "Co", "Fe", "Cu", "Pt", "Au", "Xx", "PMe3", "CN", "CO",
                                   "NH3", "H2O", "py", "(II)", "(-I)", "(0)", "−", "⁻", "⁺", "²", "\n", "\x00", "é",
                                   "C≡N", "99999999999999999999", "¹²"])


@SETTINGS
@given(st.one_of(st.text(max_size=40), st.lists(FORMULA_PIECES, max_size=14).map("".join)))
def test_formulas_never_raise_anything_but_input_error(text):
    _refused_cleanly(lambda: complex_from_formula(text), "formula")


@SETTINGS
@given(st.lists(st.text(max_size=20), max_size=3))
def test_estimate_overrides_never_raise_anything_but_input_error(items):
    _refused_cleanly(lambda: parse_overrides(items), "override")


# ------------------------------------------------------------------------------------------ recipes

def _odd():
    return st.one_of(st.booleans(), st.integers(-10**20, 10**20), st.floats(), st.text(max_size=8),
                     st.lists(st.integers(-3, 5), max_size=3), st.dictionaries(st.text(max_size=3), st.integers(),
                                                                                max_size=2))


def _pick(*good):
    return st.one_of(st.sampled_from(good), _odd())


XYZ = st.one_of(st.sampled_from([
    "N 0 0 0\nH 0 0 1", "N nan 0 0\nH 0 0 1", "N 0 0 0\nH 0 0 0", "N inf 0 0", "2\n\nN 0 0 0\nH 0 0 1", "Xx 0 0 0",
    "N 0 0 0\nH 1e308 1e308 1e308", "N 0 0 0\nC 0 0 1e-9", "3\ncomment\nN 0 0 0\nH 0 0 1\n", "", "N 0 0",
    "\n".join(f"H {i} 0 0" for i in range(1, 400)) + "\nN 0 0 0"]), st.text(max_size=30))
LIGAND = st.fixed_dictionaries(
    {"xyz": XYZ, "donor_index": _pick(0, 1, -1, 5, 10**12), "charge": _pick(0, -1, 1)},
    optional={"f": _pick(1.0, math.nan, math.inf, -1.0), "pi_ratio": _pick(0.0, -0.5), "h": _pick(1.0, math.inf),
              "repulsion_cm": _pick(1000.0, -5.0, math.nan), "label": _pick("x", "../evil", "a\nb", "=cmd", "a|b"),
              "distance_angstrom": _pick(2.0, 0.0, -1.0, math.nan, 1e9)})
COMPLEX = st.fixed_dictionaries({}, optional={
    "formula": _pick("[NiCl4]2-", "[NiX4]2+", "[NiX2Cl2]", "[Ni(X)4]2+", "[ZnCl4]2-", "[Ni(II)Cl4]2-", "[NiCl99]"),
    "metal": _pick("Ni", "Zn", "Pd"), "oxidation_state": _pick(2, 0, 9, -3),
    "ligands": st.lists(_pick("Cl", "X", "PMe3", "CO"), max_size=5), "charge": _pick(-2, 0),
    "spins": st.lists(_pick(0, 2, 1, -2, 100), max_size=3),
    "arrangements": st.lists(_pick("T-4", "SP-4", "SS-4", "vTBPY-4", "OC-6"), max_size=3),
    "estimate": st.dictionaries(st.sampled_from(["Cl.e_sigma", "X.f", "metal.B", "e_scale", "Q.e_pi"]),
                                _pick(4000.0, math.nan, -1.0, math.inf), max_size=2),
    "name": _pick("a", "../b", "a\x00b")})
LEVEL = st.one_of(_pick("screen", "quick", "standard", "ultra"), st.fixed_dictionaries(
    {"base": _pick("quick", "screen")},
    optional={"functional": _pick("pbe0", "b3lyp", "nonsense"), "basis": _pick("def2-svp", "foo"), "grid": _pick(1, 9),
              "solvent": _pick("water", "lava"), "dispersion": _pick("d3bj", "none")}))
RECIPE = st.fixed_dictionaries({"complex": st.lists(COMPLEX, max_size=2)}, optional={
    "title": _pick("t", "../x", "a\x00b", "=1+1", "a\nb"), "level": LEVEL,
    "solvent": _pick("water", "gas", "lava", "dichloromethane"),
    "arrangements": st.lists(_pick("T-4", "SP-4"), max_size=3),
    "relaxations": st.lists(_pick("held", "free"), max_size=3),
    "path_points": _pick(0, 2, 3, 1, -1, 10**9),
    "ligands": st.dictionaries(st.sampled_from(["X", "Cl", "../x", "a b", "", "Y", "a\"b"]), LIGAND, max_size=2),
    "run": st.dictionaries(st.sampled_from(["workers", "timeout_s", "max_steps", "threads", "colour"]),
                           _pick(1, 0, -1, 1.5, math.nan, math.inf, 10**30), max_size=3),
    "cluster": st.dictionaries(st.sampled_from(["cores", "memory", "walltime", "jobs"]), _pick(4, "8GB", "01:00:00", 0),
                               max_size=4),
    "unknown": _odd()})


def _toml(document: dict) -> str | None:
    try:
        return tomli_w.dumps(document)
    except (TypeError, ValueError):  # a document TOML cannot hold (None, mixed nesting): nothing to test
        return None


def _load_and_expand(text: str):
    study = parse_recipe(text, "fuzz.toml")
    return expand(study)  # a study that validates must also build every structure of its jobs


@SETTINGS
@given(st.one_of(st.text(max_size=200), st.binary(max_size=100).map(lambda b: b.decode("latin-1"))))
def test_random_text_as_a_recipe_is_an_input_error(text):
    _refused_cleanly(lambda: _load_and_expand(text), "recipe text")


@SETTINGS
@given(RECIPE)
def test_near_recipes_validate_or_fail_in_one_line(document):
    text = _toml(document)
    if text is not None:
        _refused_cleanly(lambda: _load_and_expand(text), "structured recipe")


# ------------------------------------------------------------------------------------------ custom ligands

LIGAND_CASES = {
    "a NaN coordinate": ('xyz = "N nan 0 0\\nH 0 0 1"\ndonor_index = 0', "not a finite number"),
    "an infinite coordinate": ('xyz = "N 0 0 0\\nH 0 inf 1"\ndonor_index = 0', "not a finite number"),
    "two atoms on one spot": ('xyz = "N 0 0 0\\nH 0 0 0.1"\ndonor_index = 0', "atoms 0 and 1 are 0.10 Å apart"),
    "a donor index past the end": ('xyz = "N 0 0 0\\nH 0 0 1"\ndonor_index = 2', "outside the fragment's 2 atoms"),
    "a negative donor index": ('xyz = "N 0 0 0\\nH 0 0 1"\ndonor_index = -1', "outside the fragment's 2 atoms"),
    "a NaN ligand-field parameter": ('xyz = "N 0 0 0\\nH 0 0 1"\ndonor_index = 0\nf = nan', "f must be a finite"),
    "a start distance of zero": ('xyz = "N 0 0 0\\nH 0 0 1"\ndonor_index = 0\ndistance_angstrom = 0',
                                 "no metal–donor distance"),
    "a fragment of 1000 atoms": ('xyz = "N 0 0 0\\n' + "\\n".join(f"H {i} 0 0" for i in range(1, 1000)) + '"\n'
                                 "donor_index = 0", "at most 200"),
}


@pytest.mark.parametrize("case", LIGAND_CASES)
def test_bad_custom_ligands_are_one_line_through_the_command(tmp_path, case):
    body, fragment = LIGAND_CASES[case]
    recipe = tmp_path / "bad.toml"
    recipe.write_text(f'level = "screen"\n[ligands.Lx]\n{body}\ncharge = 0\n[[complex]]\nformula = "[Ni(Lx)4]2+"\n')
    fault(f"a custom ligand with {case}")
    result = command("run", recipe, "--out", tmp_path / "out", what=f"ligand with {case}")
    assert result.returncode == 2
    line = one_line(result.stderr)
    assert fragment in line and "ligands.Lx" in line, line
    assert not (tmp_path / "out").exists()


def test_ten_megabyte_files_are_refused_at_once(tmp_path):
    big = tmp_path / "huge.toml"
    big.write_text('title = "x"\n# ' + "x" * 10_000_000 + '\n[[complex]]\nformula = "[NiCl4]2-"\n')
    for args in (("run", big, "--out", tmp_path / "out"), ("run", tmp_path / "r.toml", "--out", tmp_path / "out",
                                                           "--cluster", "slurm", "--cluster-config", big)):
        if args[1] != big:
            args[1].write_text('level = "screen"\n[[complex]]\nformula = "[NiCl4]2-"\n')
        fault(f"a 10 MB {'recipe' if args[1] == big else 'cluster file'}")
        result = command(*args, what="a 10 MB input file")
        if "sbatch" in result.stderr:
            continue  # no batch system here: refused before the cluster file is read (a one-line error too)
        assert result.returncode == 2 and "MB" in one_line(result.stderr), result.stderr
    fault("a 100 kB formula on the command line")
    formula = command("estimate", "[Ni" + "Cl" * 50_000 + "]", what="a 100 kB formula")
    assert formula.returncode == 2 and len(one_line(formula.stderr)) < 400


def test_a_recipe_that_is_no_text_is_one_line(tmp_path):
    path = tmp_path / "binary.toml"
    path.write_bytes(bytes(range(256)) * 10)
    fault("a binary file as recipe")
    result = command("run", path, "--out", tmp_path / "out", what="binary recipe")
    assert result.returncode == 2 and "not UTF-8" in one_line(result.stderr)


# ------------------------------------------------------------------------------------------ titles in outputs

NASTY_TITLE = '=HYPERLINK("http://x")|../../etc/passwd \'quoted\' "double" $\\frac{1}{2}$ 100% <b>*bold*</b> #_x_'


def test_a_nasty_title_stays_inside_the_folder_and_is_escaped_everywhere(zinc_copy, tmp_path):
    recipe = zinc_copy / "recipe.toml"
    text = recipe.read_text()
    recipe.write_text(text.replace('title = "faults"', "title = " + tomli_w.dumps({"t": NASTY_TITLE})[4:].strip()))
    assert tomllib.loads(recipe.read_text())["title"] == NASTY_TITLE
    outside = {p for p in tmp_path.parent.rglob("*")}
    fault("a title with ../, /, quotes and markup")
    result = fourfold("report", zinc_copy, what="report of a nasty title")
    assert result.returncode == 0, result.stderr
    assert {p for p in tmp_path.parent.rglob("*")} - outside <= {p for p in zinc_copy.rglob("*")}  # nothing outside
    tables = zinc_copy / "tables"
    markdown = (tables / "report.md").read_text()
    heading = markdown.splitlines()[0]
    assert heading.startswith("# ") and "\\|" in heading and "\\<b\\>" in heading and "\\*bold\\*" in heading
    latex = (tables / "report.tex").read_text()
    title_line = next(line for line in latex.splitlines() if line.startswith(r"\title{"))
    assert r"\$\textbackslash{}frac\{1\}\{2\}\$" in title_line and r"100\%" in title_line and r"\#\_x\_" in title_line
    for path in tables.glob("*.csv"):  # every cell reads back; none opens as a spreadsheet formula
        for row in csv.reader(io.StringIO(path.read_text())):
            assert not any(cell.startswith(("=", "+", "@")) for cell in row), (path.name, row)
    check_clean(markdown + latex, "outputs of a nasty title")


@pytest.mark.parametrize("cell", ["=1+1", "+SUM(A1)", "-2+3", "@cmd", "\tx", "=HYPERLINK(\"http://x\",\"y\")"])
def test_csv_cells_that_look_like_formulas_are_written_as_text(cell):
    from fourfold.report.table import Column, Table, to_csv

    note("bad_input", 1, "CSV cell")
    table = Table("t", "t", [Column("name", "name", "name")], [{"name": cell}])
    rows = list(csv.reader(io.StringIO(to_csv(table))))
    assert rows[1] == ["'" + cell]  # the leading apostrophe makes a spreadsheet show the text


@pytest.mark.parametrize("title", ["a\nb", "tab\there", "bell\x07", "esc\x1b[2J"])
def test_control_characters_in_a_title_are_one_line_errors(title):
    note("bad_input", 1, "control character in a title")
    with pytest.raises(InputError) as caught:
        parse_recipe(tomli_w.dumps({"title": title, "complex": [{"formula": "[ZnCl4]2-"}]}), "t.toml")
    assert str(caught.value).isprintable() and "title" in str(caught.value)
