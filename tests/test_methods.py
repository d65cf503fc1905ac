"""The methods text: what a screen, a quick and a custom study ran, with every code's version and a citation
for every method, checked against the programs themselves (PySCF's auxiliary-basis table and basis aliases,
Libxc's references, the dftd3 package's parameters, geomeTRIC's own citation) and against the BibTeX it writes.

No calculation runs here: the Study objects come from recipe text and methods_text reads only the Study and the
installed programs' tables.
"""

from __future__ import annotations

import re
from types import SimpleNamespace

import pytest

from fourfold.report.methods import (
    CODES,
    codes_used,
    dispersion_parameters,
    grid_points,
    method_versions,
    methods_files,
    methods_text,
)
from fourfold.study.recipe import parse_recipe

SCREEN = """
title = "screen methods"
level = "screen"

[[complex]]
formula = "[NiCl4]2-"
"""

QUICK = """
title = "quick methods"
level = "quick"
path_points = 3

[[complex]]
formula = "[NiCl4]2-"

[[complex]]
formula = "[PdCl4]2-"
"""

CUSTOM = """
title = "custom methods"
relaxations = ["free"]

[level]
base = "quick"
functional = "pbe0"
basis = "def2-tzvp"
grid_level = 4
scf_grid_level = 2
conv_tol = 1e-7
max_cycles = 80
solvent = "dichloromethane"
geometry_from = "self"

[[complex]]
formula = "[NiCl4]2-"
"""

# A hand-written reader, independent of fourfold's: entry type and key, then the fields' names.
BIB_ENTRY = re.compile(r"^@(\w+)\{([^,\s]+),\s*$(.*?)^\}\s*$", re.MULTILINE | re.DOTALL)
BIB_FIELD = re.compile(r"^\s+(\w+) = \{(.*)\},?\s*$", re.MULTILINE)
LATEX_CITE = re.compile(r"\\cite\{([^}]*)\}")
PANDOC_CITE = re.compile(r"\[(@[^\]]+)\]")


def read_bib(text: str) -> dict[str, dict]:
    entries = {}
    for kind, key, body in BIB_ENTRY.findall(text):
        assert key not in entries, f"duplicate BibTeX key {key}"
        entries[key] = {"type": kind, **dict(BIB_FIELD.findall(body))}
    return entries


def cited(text: str) -> tuple[set[str], set[str]]:
    latex = {k.strip() for group in LATEX_CITE.findall(text) for k in group.split(",")}
    pandoc = {k.strip().lstrip("@") for group in PANDOC_CITE.findall(text) for k in group.split(";")}
    return latex, pandoc


@pytest.fixture(scope="module")
def versions():
    return method_versions()


@pytest.fixture(scope="module")
def texts(versions):
    return {name: methods_text(parse_recipe(recipe, f"{name}.toml"), versions)
            for name, recipe in (("screen", SCREEN), ("quick", QUICK), ("custom", CUSTOM))}


# --------------------------------------------------------------------------------------------- codes

@pytest.mark.parametrize("name", ["screen", "quick", "custom"])
def test_every_code_run_is_named_with_its_installed_version_and_cited(texts, versions, name):
    study = parse_recipe({"screen": SCREEN, "quick": QUICK, "custom": CUSTOM}[name])
    text = texts[name]
    for code in codes_used(study.level):
        shown, keys = CODES[code]
        assert versions[code] != "absent", f"{code} is not installed"
        assert f"{shown} {versions[code]} [@{keys[0]}]" in text.markdown
        assert f"{shown} {versions[code]} \\cite{{{keys[0]}}}" in text.latex


def test_the_versions_are_the_installed_ones():
    # importlib.metadata is what pip reports; Libxc is the library PySCF loads (pyscf.dft.libxc.__version__)
    from importlib import metadata

    from pyscf.dft import libxc

    found = method_versions()
    for name in ("pyscf", "tblite", "geometric", "dftd3", "ase", "numpy", "scipy"):
        assert found[name] == metadata.version(name)
    assert found["libxc"] == libxc.__version__


def test_a_screen_study_claims_no_dft_code_or_setting(texts):
    # screen runs GFN2-xTB only (compute/levels.py): naming PySCF, a functional or a basis would be false
    md = texts["screen"].markdown
    for absent in ("PySCF", "Libxc", "dftd3", "B3LYP", "def2", "C-PCM", "grid level"):
        assert absent not in md


# -------------------------------------------------------------------------------------- the screen text

def test_the_screen_text_names_geometry_level_relaxations_optimiser_and_phase(texts):
    md = texts["screen"].markdown
    assert "GFN2-xTB [@bannwarth2019-gfn2]" in md  # Bannwarth, Ehlert, Grimme, JCTC 2019
    assert "spin-polarisation term [@neugebauer2023-spgfn]" in md  # Neugebauer et al., JCC 2023
    assert "held relaxations keep the L–M–L arrangement" in md and "free relaxations are unconstrained" in md
    assert "geomeTRIC [@wang2016-geometric] in translation–rotation internal coordinates (TRIC)" in md
    assert "in the gas phase" in md
    assert "screen only" in md
    assert "no frequencies were computed" in md


def test_the_optimiser_criteria_are_geometrics_own_defaults(texts):
    # geomeTRIC 1.1.1, geometric/params.py: convergence set GAU = energy 1e-6 Eh, RMS/max gradient 3e-4/4.5e-4
    # Eh/bohr, RMS/max displacement 1.2e-3/1.8e-3 Å (the values of that source file, copied here by hand)
    md = texts["screen"].markdown
    assert ("energy change 10⁻⁶ Eₕ, RMS and maximum gradient 3 × 10⁻⁴ and 4.5 × 10⁻⁴ Eₕ/bohr, RMS and maximum "
            "displacement 1.2 × 10⁻³ and 1.8 × 10⁻³ Å") in md


# --------------------------------------------------------------------------------------- the quick text

def test_the_quick_text_names_functional_basis_ecp_fitting_dispersion_phase_grid_and_threshold(texts):
    md = texts["quick"].markdown
    assert "B3LYP functional [@becke1993-b3lyp; @lee1988-lyp; @stephens1994-b3lyp]" in md
    assert "20 % exact exchange" in md  # B3LYP's a0 = 0.20 (Becke, J. Chem. Phys. 1993, 98, 5648)
    assert "The def2-SVP basis set [@weigend2005-def2]" in md
    # 4d metals carry the def2 ECP (Andrae et al., Theor. Chim. Acta 1990); Ni (3d) is all-electron
    assert "def2 effective core potentials [@andrae1990-ecp] on Pd (every atom with Z ≥ 37)" in md
    assert "density-fitted with the def2-universal-jkfit auxiliary basis [@weigend2008-jkfit]" in md
    assert "D3 dispersion correction [@grimme2010-d3] with Becke–Johnson damping [@grimme2011-bj]" in md
    # the quick study holds dianions: they get a continuum (positive gas-phase HOMOs, benchmarks/ion_solvent.py)
    assert "Neutral complexes were computed in the gas phase. The charged ones" in md
    assert "C-PCM model [@barone1998-cpcm] for acetonitrile" in md
    assert "integration grid level 1" in md  # the quick preset's grid_level (compute/levels.py)
    assert "energy change below 10⁻⁶ Eₕ" in md  # the quick preset's conv_tol
    assert "Structures were relaxed with GFN2-xTB" in md and "Energies are single points on these structures" in md
    assert "Yamaguchi's formula [@yamaguchi1988-projection]" in md
    assert "3 structures with trans L–M–L angles from 109.47° to 180°" in md


def test_pyscf_picks_def2_universal_jkfit_for_def2_svp_with_a_hybrid():
    # PySCF 2.14, pyscf/df/addons.py: DEFAULT_AUXBASIS['def2svp'] = ('def2-svp-jkfit', 'def2-svp-ri'), the first
    # for hybrid functionals; pyscf/gto/basis/__init__.py: ALIAS['def2svpjkfit'] = 'def2-universal-jkfit.dat'.
    # Checked on PySCF itself: the DF object of a B3LYP mean field, and the basis data behind the alias.
    from pyscf import dft, gto

    from fourfold.compute.levels import custom_level, get_level
    from fourfold.report.methods import auxiliary_basis

    mol = gto.M(atom="Ni 0 0 0", basis="def2-svp", spin=2, verbose=0)
    mf = dft.UKS(mol)
    mf.xc = "b3lyp"
    assert mf.density_fit().with_df.auxbasis == "def2-svp-jkfit"
    assert gto.basis.load("def2-svp-jkfit", "Ni") == gto.basis.load("def2-universal-jkfit", "Ni")
    assert auxiliary_basis(get_level("quick"), "def2-svp") == "def2-universal-jkfit"
    # a pure functional gets the Coulomb-only set (Basis Set Exchange record): def2-universal-jfit
    pure = dict(get_level("quick").to_dict(), functional="pbe")
    assert auxiliary_basis(custom_level(pure), "def2-svp") == "def2-universal-jfit"


def test_the_grid_points_are_pyscfs_own(texts):
    # PySCF 2.14, pyscf/dft/gen_grid.py: level 1 gives a 4th-row atom 60 radial and 194 angular points, a 5th-row
    # atom 65 × 194; compared with PySCF's own per-atom functions (private names, read in this test only)
    from pyscf.dft import gen_grid

    for z in (28, 46, 78, 17, 1):
        for level in (1, 3, 4):
            assert grid_points(z, level) == (gen_grid._default_rad(z, level), gen_grid._default_ang(z, level))
    assert grid_points(28, 1) == (60, 194) and grid_points(46, 1) == (65, 194)
    assert "radial × angular points Ni 60 × 194, Pd 65 × 194" in texts["quick"].markdown


def test_the_d3bj_parameters_shown_are_the_ones_the_library_applies(texts):
    # The dftd3 package's B3LYP-D3(BJ) parameters (Grimme, Ehrlich, Goerigk, J. Comput. Chem. 2011, 32, 1456):
    # the energy with the numbers printed in the text equals the energy the library computes by name.
    from dftd3.pyscf import DFTD3Dispersion
    from pyscf import gto

    from fourfold.compute.levels import get_level

    found = dispersion_parameters(get_level("quick"))
    assert (found["s6"], found["s8"], found["a1"], found["a2"]) == (1.0, 1.9889, 0.3981, 4.4211)
    assert "s₆ = 1, s₈ = 1.9889, a₁ = 0.3981, a₂ = 4.4211 bohr" in texts["quick"].markdown
    mol = gto.M(atom="Ni 0 0 0; Cl 2.27 0 0; Cl -2.27 0 0; Cl 0 2.27 0; Cl 0 -2.27 0", charge=-2, basis="sto-3g",
                verbose=0)
    by_name = DFTD3Dispersion(mol, xc="b3lyp", version="d3bj").kernel()[0]
    # two-body only: fourfold's D3(BJ) runs without the three-body term (atm=False, so s9 = 0)
    by_numbers = DFTD3Dispersion(mol, version="d3bj", param={"s6": found["s6"], "s8": found["s8"], "a1": found["a1"],
                                                              "a2": found["a2"], "s9": 0.0}).kernel()[0]
    assert by_name == pytest.approx(by_numbers, abs=1e-12)


def test_without_a_projected_singlet_in_the_results_the_projection_is_not_claimed(versions):
    study = parse_recipe(QUICK)
    none = SimpleNamespace(complexes=[SimpleNamespace(records=[SimpleNamespace(projected_energy_hartree=None)],
                                                      path_records=[])])
    some = SimpleNamespace(complexes=[SimpleNamespace(records=[SimpleNamespace(projected_energy_hartree=-1.0)],
                                                      path_records=[])])
    assert "yamaguchi1988-projection" not in methods_text(study, versions, none).keys
    assert "yamaguchi1988-projection" in methods_text(study, versions, some).keys


def test_state_search_and_thermochemistry_hooks_enter_the_text(versions):
    study = parse_recipe(QUICK)
    text = methods_text(study, versions, state_search="Each state was started from three guesses",
                        thermochemistry="Free energies at 298.15 K from harmonic frequencies at the geometry level")
    assert "Each state was started from three guesses." in text.markdown
    assert "Free energies at 298.15 K from harmonic frequencies" in text.latex
    assert "no frequencies were computed" not in text.markdown


# ------------------------------------------------------------------------------------- a custom level

def test_a_custom_level_table_appears_setting_by_setting(texts):
    md = texts["custom"].markdown
    assert "the PBE0 functional" in md
    assert "25 % exact exchange" in md  # PBE0: a0 = 1/4 (Adamo & Barone, J. Chem. Phys. 1999, 110, 6158)
    assert "The def2-TZVP basis set" in md
    assert "integration grid level 4" in md and "converged on grid level 2 first and finished on level 4" in md
    assert "energy change below 10⁻⁷ Eₕ" in md and "at most 80 cycles per attempt" in md
    # dichloromethane, ε = 8.93 at 298 K (Minnesota Solvent Descriptor Database, docs/sources.md#mnsol-solvents)
    assert "C-PCM model [@barone1998-cpcm] for dichloromethane (ε = 8.93 [@mnsol-solvents]" in md
    assert "ALPB solvation model for dichloromethane [@ehlert2021-alpb]" in md
    assert "Starts were pre-relaxed (held) with GFN2-xTB" in md and "Structures were then relaxed with" in md
    assert "Every state was relaxed in one way: free relaxations" in md and "held relaxations keep" not in md
    assert "Final energies are single points" not in md  # no single_point_basis in this level


def test_a_functional_missing_from_the_bundled_file_is_cited_as_libxc_gives_it(texts):
    # Libxc's references for PBE0: Adamo & Barone, J. Chem. Phys. 110, 6158 (1999); Ernzerhof & Scuseria,
    # J. Chem. Phys. 110, 5029 (1999) (as Libxc 7.0.0 lists them through pyscf.dft.libxc.xc_reference)
    bib = read_bib(texts["custom"].bibtex)
    assert {"adamo1999-libxc", "ernzerhof1999-libxc"} <= set(bib)
    assert bib["adamo1999-libxc"]["volume"] == "110" and bib["adamo1999-libxc"]["pages"] == "6158"
    # the damping parameters of PBE0 are Grimme, Ehrlich, Goerigk 2011 (dftd3 parameters.toml, d3.bj doi)
    assert "grimme2011-bj" in bib


def test_the_bundled_functional_entries_are_the_ones_libxc_cites():
    # Libxc's own reference for each functional (pyscf.dft.libxc.xc_reference) matches a bundled entry by
    # volume, first page and year, so no entry is made up for them
    from fourfold.report.methods import _libxc_citations

    assert _libxc_citations("b3lyp", "x") == (["stephens1994-b3lyp"], {})
    assert _libxc_citations("tpssh", "x") == (["staroverov2003-tpssh"], {})
    keys, made = _libxc_citations("pbe", "x")
    assert keys[0] == "perdew1996-pbe" and set(made) == {"perdew1997-libxc"}  # Libxc also cites the erratum


# ---------------------------------------------------------------------------------- citations and BibTeX

@pytest.mark.parametrize("name", ["screen", "quick", "custom"])
def test_every_citation_is_in_the_bib_and_every_entry_is_cited(texts, name):
    text = texts[name]
    bib = read_bib(text.bibtex)
    latex_keys, pandoc_keys = cited(text.latex)[0], cited(text.markdown)[1]
    assert latex_keys == pandoc_keys == set(bib) == set(text.keys)
    assert len(bib) >= 8
    for key, entry in bib.items():
        assert "title" in entry or "note" in entry or "doi" in entry, key


def test_the_bundled_database_parses_and_its_keys_are_docs_sources_anchors():
    from pathlib import Path

    import fourfold.data

    text = (Path(fourfold.data.__file__).parent / "references.bib").read_text(encoding="utf-8")
    bib = read_bib(text)
    assert len(bib) >= 8 and len(bib) == text.count("\n@")
    sources = (Path(__file__).resolve().parents[1] / "docs" / "sources.md").read_text(encoding="utf-8")
    anchors = set(re.findall(r"^### (\S+)", sources, re.MULTILINE)) | set(re.findall(r'<a id="([^"]+)">', sources))
    assert set(bib) <= anchors, f"no docs/sources.md entry for {sorted(set(bib) - anchors)}"
    for key, entry in bib.items():
        assert entry["type"] in ("article", "misc", "book"), key
        if entry["type"] == "article":
            assert {"author", "title", "journal", "year", "pages"} <= set(entry), key


def test_programs_own_citations_agree_with_the_bundled_entries():
    from pathlib import Path

    import geometric.info
    from pyscf.dft import libxc

    import fourfold.data

    bib = read_bib((Path(fourfold.data.__file__).parent / "references.bib").read_text(encoding="utf-8"))
    # Libxc's citation as PySCF exposes it
    assert libxc.__reference_doi__ == bib["lehtola2018-libxc"]["doi"]
    assert "SoftwareX 7" in libxc.__reference__ and "Lehtola" in libxc.__reference__
    # geomeTRIC's own citation (geometric/info.py, print_citation)
    logged = []
    geometric.info.print_citation(SimpleNamespace(info=logged.append))
    assert bib["wang2016-geometric"]["doi"] in logged[0] and "144, 214108" in logged[0]
    # the dftd3 package's parameter file: zero damping -> Grimme et al. 2010, BJ damping -> Grimme et al. 2011
    import tomllib
    from importlib import resources

    with resources.files("dftd3").joinpath("parameters.toml").open("rb") as handle:
        b3lyp = tomllib.load(handle)["parameter"]["b3lyp"]["d3"]
    assert b3lyp["zero"]["doi"] == bib["grimme2010-d3"]["doi"]
    assert b3lyp["bj"]["doi"] == bib["grimme2011-bj"]["doi"]


def test_the_latex_is_plain_ascii_with_balanced_braces_and_math(texts):
    for text in texts.values():
        latex = text.latex
        assert latex.isascii(), [c for c in latex if not c.isascii()]
        assert "?" not in latex  # report.table.tex_escape's mark for a character it cannot set
        assert latex.count("{") == latex.count("}")
        for paragraph in latex.split("\n\n"):
            assert paragraph.replace(r"\$", "").count("$") % 2 == 0


def test_program_entries_carry_the_version_that_ran(texts, versions):
    bib = read_bib(texts["quick"].bibtex)
    assert bib["fourfold"]["version"] == versions["fourfold"]
    assert bib["tblite"]["version"] == versions["tblite"]
    assert bib["simple-dftd3"]["version"] == versions["dftd3"]


# ------------------------------------------------------------------------------------------------ files

def test_the_files_hold_text_references_and_safety_last(versions):
    from fourfold.chem.hazards import DEFERRAL, cautions_markdown

    study = parse_recipe(QUICK)
    safety = cautions_markdown([e.complex for e in study.complexes], heading="## Safety")
    files = methods_files(study, versions, None, safety)
    assert set(files) == {"methods.md", "methods.tex", "references.bib"}
    md = files["methods.md"]
    assert md.index("## References") < md.index("## Safety") and md.rstrip().endswith(DEFERRAL)
    assert "Nickel" in md[md.index("## Safety"):] or "nickel" in md[md.index("## Safety"):]
    references = md[md.index("## References"):md.index("## Safety")]
    assert set(re.findall(r"^- `([^`]+)`", references, re.MULTILINE)) == set(read_bib(files["references.bib"]))
    assert "\\" not in references and "{" not in references  # BibTeX markup turned into text


def test_write_report_writes_the_methods_files_into_tables(tmp_path):
    from fourfold.pipeline import open_store
    from fourfold.report.render import write_report

    study = parse_recipe(SCREEN)
    store = open_store(tmp_path, must_exist=False)  # no results yet: the methods text needs only the study
    names = {p.name for p in write_report(tmp_path, study, store).tables}
    assert {"methods.md", "methods.tex", "references.bib"} <= names
    assert (tmp_path / "tables" / "methods.md").read_text(encoding="utf-8").count("## Safety") == 1
    # the formats asked for decide which of the two texts are written
    names = {p.name for p in write_report(tmp_path / "md", study, store, formats=("md", "csv")).tables}
    assert {"methods.md", "references.bib"} <= names and "methods.tex" not in names
    names = {p.name for p in write_report(tmp_path / "csv", study, store, formats=("csv",)).tables}
    assert not names & {"methods.md", "methods.tex", "references.bib"}
