"""The methods text of a study: paragraphs a chemist can paste into a manuscript's computational details.

``methods_text(study, versions)`` describes what the study ran — codes with versions, the geometry level,
relaxation kinds and optimiser, functional, basis, ECPs, auxiliary basis, dispersion, solvent model, grids,
SCF thresholds and the SCF/spin-state policy, path points, the analysis — from the Study itself (its
``Level``) and from the programs it ran (PySCF's own choice of auxiliary basis and grids, the dftd3 package's
damping parameters, geomeTRIC's convergence criteria), so the text cannot drift from what ran. Every method
and code carries a citation key of ``data/references.bib``; a functional that file lacks is cited with the
references Libxc itself gives for it.

One text, two forms: Markdown with pandoc citations (``[@key]``) and LaTeX with ``\\cite{key}``; ``bibtex``
holds exactly the cited entries, in the order of first citation (programs' entries with the version that ran).

``methods_files(study, versions, comparison, safety_markdown, formats)`` gives the report's files: methods.md
(the text, a reference list, the study's safety cautions), methods.tex and references.bib; ``write_report``
writes them into the study folder's tables/ beside report.md. ``study_versions(folder)`` takes the versions
the run recorded (versions.json) over the installed ones.
"""

from __future__ import annotations

import re
import unicodedata
from dataclasses import dataclass, field
from functools import cache
from importlib import metadata, resources
from pathlib import Path

from ..errors import InputError
from .markup import formula_latex, formula_unicode
from .table import tex_escape

# ------------------------------------------------------------------------------------------ text parts


@dataclass(frozen=True)
class Cite:
    keys: tuple[str, ...]


@dataclass(frozen=True)
class Math:
    """A symbol or number written differently in the two forms."""

    markdown: str
    latex: str


@dataclass(frozen=True)
class Formula:
    text: str  # fourfold's canonical formula, e.g. "[NiCl4]2-"


def _cite(*keys: str) -> Cite:
    return Cite(tuple(keys))


def _render(parts, form: str) -> str:
    out = []
    for part in parts:
        if isinstance(part, Cite):
            out.append("[" + "; ".join(f"@{k}" for k in part.keys) + "]" if form == "md"
                       else r"\cite{" + ",".join(part.keys) + "}")
        elif isinstance(part, Math):
            out.append(part.markdown if form == "md" else part.latex)
        elif isinstance(part, Formula):
            out.append(formula_unicode(part.text) if form == "md" else formula_latex(part.text))
        else:
            out.append(part if form == "md" else tex_escape(part))
    return "".join(out)


_SUBSCRIPTS = str.maketrans("0123456789", "₀₁₂₃₄₅₆₇₈₉")
_SUPERSCRIPTS = str.maketrans("0123456789-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁻")

HARTREE = Math("Eₕ", r"$E_\mathrm{h}$")
EPSILON = Math("ε", r"$\varepsilon$")
TWO_S = Math("2S", "$2S$")


def _number(value: float) -> Math:
    """A threshold as a chemist writes it: 1e-06 -> 10⁻⁶, 4.5e-4 -> 4.5 × 10⁻⁴, 0.3 -> 0.3."""
    if value == 0 or 1e-2 <= abs(value) < 1e4:
        text = f"{value:g}"
        return Math(text, text)
    mantissa, exponent = f"{value:.2e}".split("e")
    mantissa = mantissa.rstrip("0").rstrip(".")
    power = int(exponent)
    md = f"10{str(power).translate(_SUPERSCRIPTS)}"
    tex = f"10^{{{power}}}"
    if mantissa != "1":
        md, tex = f"{mantissa} × {md}", rf"{mantissa}\times {tex}"
    return Math(md, f"${tex}$")


def _symbol(base: str, sub: str) -> Math:
    return Math(base + sub.translate(_SUBSCRIPTS), f"${base}_{{{sub}}}$")


# ------------------------------------------------------------------------------------------- versions

# name -> (how the text names it, citation keys)
CODES = {
    "fourfold": ("fourfold", ("fourfold",)),
    "tblite": ("tblite", ("tblite",)),
    "geometric": ("geomeTRIC", ("wang2016-geometric",)),
    "pyscf": ("PySCF", ("sun2020-pyscf",)),
    "libxc": ("Libxc", ("lehtola2018-libxc",)),
    "dftd3": ("the dftd3 package", ("simple-dftd3",)),
    "ase": ("ASE", ("larsen2017-ase",)),
    "numpy": ("NumPy", ("harris2020-numpy",)),
    "scipy": ("SciPy", ("virtanen2020-scipy",)),
}
# Programs without a paper: their BibTeX entry carries the version that ran.
SOFTWARE_ENTRIES = {"fourfold": "fourfold", "tblite": "tblite", "simple-dftd3": "dftd3"}


def method_versions() -> dict[str, str]:
    """Installed versions of every code in ``CODES`` (``code_versions()`` of the job keys, extended); Libxc's
    is the library PySCF loads, which has no package metadata of its own."""
    from ..study.jobs import code_versions

    versions = dict(code_versions())
    for name in ("dftd3", "ase", "numpy", "scipy"):
        try:
            versions[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            versions[name] = "absent"
    from pyscf.dft import libxc

    versions["libxc"] = str(libxc.__version__)
    return versions


def codes_used(level) -> tuple[str, ...]:
    """The codes a study at ``level`` runs, in the order the text names them: GFN2-xTB (tblite) at every level
    (screen, geometries or pre-relaxations), PySCF and SciPy for hf/dft, Libxc for dft, dftd3 with a
    dispersion correction."""
    used = ["fourfold", "tblite", "geometric"]
    if level.method in ("hf", "dft"):
        used.append("pyscf")
        if level.method == "dft":
            used.append("libxc")
        if level.dispersion is not None:
            used.append("dftd3")
    used += ["ase", "numpy"]
    if level.method in ("hf", "dft"):
        used.append("scipy")
    return tuple(used)


# ------------------------------------------------------------------------------------------ BibTeX


@dataclass
class BibEntry:
    kind: str
    key: str
    fields: dict[str, str] = field(default_factory=dict)

    def to_bibtex(self) -> str:
        lines = [f"@{self.kind}{{{self.key},"]
        lines += [f"  {name} = {{{value}}}," for name, value in self.fields.items()]
        lines[-1] = lines[-1].rstrip(",")
        return "\n".join(lines) + "\n}\n"


_ENTRY_START = re.compile(r"@(\w+)\s*\{\s*([^,\s]+)\s*,")
_FIELD_NAME = re.compile(r"\s*,?\s*([A-Za-z_-]+)\s*=\s*")


def _balanced(text: str, start: int) -> int:
    """Index just after the brace group opening at ``text[start] == '{'``."""
    depth = 0
    for index in range(start, len(text)):
        depth += {"{": 1, "}": -1}.get(text[index], 0)
        if depth == 0:
            return index + 1
    raise InputError("references.bib: unbalanced braces; every { needs its }")


def parse_bibtex(text: str) -> dict[str, BibEntry]:
    """Entries of a BibTeX text (braced or quoted field values; text outside entries is ignored)."""
    entries = {}
    for match in _ENTRY_START.finditer(text):
        end = _balanced(text, text.index("{", match.start())) - 1
        entry, position = BibEntry(match.group(1).lower(), match.group(2)), match.end()
        while position < end:
            name = _FIELD_NAME.match(text, position, end)
            if not name:
                break
            position = name.end()
            if text[position] == "{":
                stop = _balanced(text, position)
                value = text[position + 1:stop - 1]
            elif text[position] == '"':
                stop = text.index('"', position + 1) + 1
                value = text[position + 1:stop - 1]
            else:
                stop = position + len(re.match(r"[^,\s}]*", text[position:]).group(0))
                value = text[position:stop]
            entry.fields[name.group(1).lower()] = " ".join(value.split())
            position = stop
        entries[entry.key] = entry
    return entries


@cache
def bundled_references() -> dict[str, BibEntry]:
    """The hand-written database ``data/references.bib``."""
    text = resources.files("fourfold.data").joinpath("references.bib").read_text(encoding="utf-8")
    return parse_bibtex(text)


def _first_page(pages: str) -> str:
    return re.split(r"-+", pages)[0].strip()


def _matching_entry(journal_volume_page_year: tuple[str, str, str, str]) -> str | None:
    """The bundled entry with this volume, first page and year (journal abbreviations differ)."""
    _, volume, page, year = journal_volume_page_year
    for entry in bundled_references().values():
        f = entry.fields
        if (f.get("volume"), _first_page(f.get("pages", "")), f.get("year")) == (volume, page, year):
            return entry.key
    return None


_LIBXC_REFERENCE = re.compile(r"^(?P<authors>.+?)\.?,\s+(?P<journal>.+?)\s+(?P<volume>[\w-]+),\s+(?P<page>[\w-]+)"
                              r"\s+\((?P<year>\d{4})\)\s*$")


def _ascii_lower(text: str) -> str:
    return unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode().lower()


def _libxc_citations(functional: str, libxc_version: str) -> tuple[list[str], dict[str, BibEntry]]:
    """Citation keys for ``functional`` from the references Libxc gives for it: a bundled entry where one
    has the same volume, first page and year, otherwise an entry built from Libxc's reference text."""
    from pyscf.dft import libxc

    keys, made = [], {}
    for reference in dict.fromkeys(libxc.xc_reference(functional)):
        found = _LIBXC_REFERENCE.match(reference.strip())
        if not found:
            key = f"libxc-{_ascii_lower(functional)}-{len(made) + 1}"
            made[key] = BibEntry("misc", key, {"note": f"{reference} (reference as given by Libxc {libxc_version})"})
            keys.append(key)
            continue
        parts = found.group("journal"), found.group("volume"), found.group("page"), found.group("year")
        key = _matching_entry(parts)
        if key is None:
            authors = [a.strip() for a in re.split(r",\s*(?:and\s+)?|\s+and\s+", found.group("authors")) if a.strip()]
            surname = re.sub(r"[^a-z]", "", _ascii_lower(authors[0].split()[-1]))
            key = f"{surname}{parts[3]}-libxc"
            made[key] = BibEntry("article", key, {
                "author": " and ".join(authors), "journal": parts[0], "year": parts[3], "volume": parts[1],
                "pages": parts[2], "note": f"reference as given by Libxc {libxc_version}"})
        if key not in keys:
            keys.append(key)
    return keys, made


# ----------------------------------------------------------------------------------- what ran, in words

FUNCTIONAL_NAMES = {"b3lyp": "B3LYP", "tpssh": "TPSSh", "pbe": "PBE", "pbe0": "PBE0", "tpss": "TPSS",
                    "b3lyp5": "B3LYP (VWN5)", "bp86": "BP86", "m06": "M06", "r2scan": "r²SCAN"}
# B3LYP is Becke's three-parameter hybrid with LYP correlation; Libxc cites only the paper that defined the
# combination (Stephens et al. 1994), so the other two are added (docs/sources.md#b3lyp).
FUNCTIONAL_EXTRA_KEYS = {"b3lyp": ("becke1993-b3lyp", "lee1988-lyp")}
# PySCF's "b3lyp" is Libxc's HYB_GGA_XC_B3LYP (PySCF >= 2.3, pyscf/dft/libxc.py XC_CODES), whose local
# correlation is VWN-RPA; said in the text because programs differ here.
FUNCTIONAL_NOTES = {"b3lyp": "with the VWN-RPA local correlation of PySCF's and Libxc's definition"}
SOLVENT_SOURCE_KEYS = {"mnsol": "mnsol-solvents", "crc": "crc-handbook"}
# PySCF's default grid schemes (pyscf/dft/gen_grid.py, Grids), named and cited when they are these functions.
GRID_SCHEMES = {"treutler_ahlrichs": ("Treutler–Ahlrichs radial", "treutler1995-grids"),
                "original_becke": ("Becke partitioning", "becke1988-partitioning")}
# Row limits of PySCF's grid tables: an element's row is how many of these its Z exceeds
# (pyscf/dft/gen_grid.py, _default_rad and _default_ang).
_GRID_ROW_LIMITS = (2, 10, 18, 36, 54, 86, 118)


def functional_name(functional: str) -> str:
    return FUNCTIONAL_NAMES.get(functional, functional.upper())


def basis_name(basis: str) -> str:
    """'def2-svp' -> 'def2-SVP' (the case the basis set's authors use); other names as written."""
    return "def2-" + basis[5:].upper() if basis.lower().startswith("def2-") else basis


def auxiliary_basis(level, basis: str) -> str | None:
    """The auxiliary basis PySCF picks for ``density_fit()`` with this basis and method (its
    ``predefined_auxbasis``: the Psi4 table DEFAULT_AUXBASIS for hybrids, else the Basis Set Exchange's
    record), resolved through PySCF's basis aliases to the file it loads; None when PySCF generates an
    even-tempered set instead."""
    from pyscf import gto
    from pyscf.df.addons import predefined_auxbasis
    from pyscf.gto.basis import ALIAS

    probe = gto.Mole()
    probe.verbose = 0
    name = predefined_auxbasis(probe, basis, level.functional if level.method == "dft" else "HF")
    if name is None:
        return None
    target = ALIAS.get(re.sub(r"[^a-z0-9+*]", "", name.lower()))
    return target[:-4] if target and target.endswith(".dat") else name


def exact_exchange_percent(level) -> float:
    from ..compute.levels import exact_exchange_fraction

    return 100.0 * exact_exchange_fraction(level)


def grid_points(z: int, grid_level: int) -> tuple[int, int]:
    """(radial, angular) points PySCF's atomic grid of ``grid_level`` has for an atom of atomic number z."""
    from pyscf.dft.gen_grid import ANG_ORDER, LEBEDEV_ORDER, RAD_GRIDS

    row = sum(z > limit for limit in _GRID_ROW_LIMITS)
    return int(RAD_GRIDS[grid_level, row]), int(LEBEDEV_ORDER[ANG_ORDER[grid_level, row]])


def dispersion_parameters(level) -> dict:
    """The D3(BJ) damping parameters the dftd3 package uses for this level's method (with their ``doi``), or
    {} when it has none."""
    import tomllib

    # The package's own parameter file, read here: its reader (dftd3.parameters) needs a TOML package that
    # is not a dependency. Defaults first, then the method's entry, as dftd3.parameters._get_params does.
    with resources.files("dftd3").joinpath("parameters.toml").open("rb") as handle:
        table = tomllib.load(handle)
    method = level.functional if level.method == "dft" else "hf"
    entry = table["parameter"].get(method, {}).get("d3", {}).get("bj")
    if entry is None:
        return {}
    return {**table["default"]["parameter"]["d3"]["bj"], **entry}


def _elements(study) -> list[tuple[str, int]]:
    """(symbol, Z) of every element in the study's complexes, metals first."""
    from ase.data import atomic_numbers

    symbols = [e.complex.metal.symbol for e in study.complexes]
    symbols += [s for e in study.complexes for lig in e.complex.ligands for s in lig.symbols]
    return [(s, atomic_numbers[s]) for s in dict.fromkeys(symbols)]


def _join(items: list[str]) -> str:
    """'a', 'a and b', 'a, b and c'."""
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]


def _parts_join(groups: list[list]) -> list:
    """Lists of text parts joined as _join joins words."""
    out = []
    for index, group in enumerate(groups):
        if index:
            out.append(" and " if index == len(groups) - 1 else ", ")
        out += group
    return out


@dataclass
class _Writer:
    """The versions the text names, and the BibTeX entries made on the way (references Libxc gives for a
    functional the bundled file lacks, a D3(BJ) parameter paper it lacks)."""

    versions: dict
    made: dict = field(default_factory=dict)


def _codes_paragraph(level, w: _Writer) -> list:
    groups = []
    for name in codes_used(level):
        shown, keys = CODES[name]
        groups.append([f"{shown} {w.versions.get(name, 'absent')} ", _cite(*keys)])
    return ["Calculations were run with ", *groups[0], ", which drives ", *_parts_join(groups[1:]), "."]


def _states_sentence(study) -> list:
    from ..geometry.isomers import isomers

    groups = []
    for entry in study.complexes:
        cx = entry.complex
        names = tuple(lig.name for lig in cx.ligands)
        shapes = []
        for arrangement in entry.arrangements:
            labels = [i.label for i in isomers(names, arrangement) if i.label]
            shapes.append(f"{arrangement} {_join(labels)}" if labels else arrangement)
        groups.append([Formula(cx.formula), f" ({', '.join(shapes)}; ", TWO_S,
                       f" = {', '.join(str(s) for s in entry.spins)})"])
    return ["Each complex was built in the arrangements and computed in the spin states listed: ",
            *_parts_join(groups), ". "]


def _relaxation_sentences(study) -> list:
    from geometric.params import OptParams

    from ..compute.relax import CONVERGENCE_SETS, HOLDABLE_ANGLE_DEG, NUDGE_ANGSTROM

    kinds = study.relaxations
    parts = [f"Every state was relaxed {'in two ways' if len(kinds) == 2 else 'in one way'}: "]
    if "held" in kinds:
        parts += ["held relaxations keep the L–M–L arrangement of the ideal start through geomeTRIC constraints "
                  f"(every L–M–L angle up to {HOLDABLE_ANGLE_DEG:g}° constrained to its start value and, in a square, "
                  "two dihedral angles keeping the donor atoms in one plane with the metal; bond lengths and the "
                  "ligands relax)"]
    if len(kinds) == 2:
        parts += ["; "]
    if "free" in kinds:
        parts += [f"free relaxations are unconstrained, from the ideal structure with every atom displaced by at "
                  f"most {NUDGE_ANGSTROM:g} Å so that no symmetry is imposed"]
    criteria = OptParams(convergence_set=CONVERGENCE_SETS["default"])
    steps = study.run.get("max_steps", 100)
    parts += [". Relaxations used geomeTRIC ", _cite("wang2016-geometric"), " in translation–rotation internal "
              "coordinates (TRIC), with its default convergence criteria (energy change ",
              _number(criteria.Convergence_energy), " ", HARTREE, ", RMS and maximum gradient ",
              _number(criteria.Convergence_grms), " and ", _number(criteria.Convergence_gmax), " ", HARTREE,
              "/bohr, RMS and maximum displacement ", _number(criteria.Convergence_drms), " and ",
              _number(criteria.Convergence_dmax), f" Å) and at most {steps} steps. "]
    if study.path_points:
        from ..geometry.polyhedra import TETRAHEDRAL_ANGLE_DEG

        parts += [f"Along the path from T-4 to SP-4, {study.path_points} structures with trans L–M–L angles from "
                  f"{TETRAHEDRAL_ANGLE_DEG:.2f}° to 180° in equal steps on the ", Math("D₂d", "$D_{2d}$"),
                  " flattening of the tetrahedron ", _cite("casanova2004-paths"),
                  " were relaxed as held relaxations at the level of the other relaxations. "]
    return parts


def _xtb_sentence(level, role: str) -> list:
    from ..study.jobs import geometry_engine

    solvent = geometry_engine(level)["solvent"]
    parts = [role, " GFN2-xTB ", _cite("bannwarth2019-gfn2"), " with tblite's spin-polarisation term ",
             _cite("neugebauer2023-spgfn"), " and tblite's default self-consistent-charge settings, "]
    if solvent is None:
        parts += ["in the gas phase. "]
    elif isinstance(solvent, str):
        parts += [f"with the ALPB solvation model for {solvent} ", _cite("ehlert2021-alpb"), ". "]
    else:
        parts += ["with the ALPB solvation model ", _cite("ehlert2021-alpb"), f" for {level.solvent} given by its "
                  "dielectric constant (", EPSILON, f" = {solvent:g}), which tblite does not parametrise by name. "]
    return parts


def _functional_sentence(level, role: str, w: _Writer) -> list:
    if level.method == "hf":
        return [role, " Hartree–Fock", *_dispersion_parts(level, w), ". "]
    keys, made = _libxc_citations(level.functional, w.versions.get("libxc", "absent"))
    w.made.update(made)
    extra = FUNCTIONAL_EXTRA_KEYS.get(level.functional, ())
    keys = [*extra, *(k for k in keys if k not in extra)]
    parts = [role, f" the {functional_name(level.functional)} functional "]
    if keys:
        parts += [_cite(*keys), " "]
    note = FUNCTIONAL_NOTES.get(level.functional)
    parts += [f"({exact_exchange_percent(level):g} % exact exchange{'; ' + note if note else ''}; from Libxc)"]
    return parts + [*_dispersion_parts(level, w), ". "]


def _dispersion_parts(level, w: _Writer) -> list:
    if level.dispersion is None:
        return [" without a dispersion correction"]
    parts = [" and Grimme's D3 dispersion correction ", _cite("grimme2010-d3"), " with Becke–Johnson damping ",
             _cite("grimme2011-bj"), " (dftd3 package; two-body terms"]
    found = dispersion_parameters(level)
    if found:
        parts += ["; ", _symbol("s", "6"), f" = {found['s6']:g}, ", _symbol("s", "8"), f" = {found['s8']:g}, ",
                  _symbol("a", "1"), f" = {found['a1']:g}, ", _symbol("a", "2"), f" = {found['a2']:g} bohr"]
        if found.get("doi"):
            parts += [" ", _cite(_doi_key(found["doi"], level, w))]
    else:
        parts += ["; the package has no parameters for this functional"]
    return parts + [")"]


def _doi_key(doi: str, level, w: _Writer) -> str:
    for entry in bundled_references().values():
        if entry.fields.get("doi", "").lower() == doi.lower():
            return entry.key
    key = f"d3bj-parameters-{_ascii_lower(level.functional or 'hf')}"
    w.made[key] = BibEntry("misc", key, {"doi": doi, "note": "D3(BJ) damping parameters as referenced by the "
                                                             "dftd3 package"})
    return key


def _basis_sentence(study, level) -> list:
    from ..compute.pyscf_engine import ECP_MIN_Z

    basis = level.basis
    parts = [f"The {basis_name(basis)} basis set "]
    if basis.startswith("def2"):
        parts += [_cite("weigend2005-def2"), " "]
    heavy = [s for s, z in _elements(study) if z >= ECP_MIN_Z]
    heavier_than_kr = Math(f"Z ≥ {ECP_MIN_Z}", rf"$Z \geq {ECP_MIN_Z}$")
    if heavy and level.ecp == "auto":
        parts += ["was used with the matching def2 effective core potentials ", _cite("andrae1990-ecp"),
                  f" on {_join(heavy)} (every atom with ", heavier_than_kr, "). "]
    elif heavy:
        parts += [f"was used with the {level.ecp} effective core potential on {_join(heavy)}. "]
    else:
        parts += ["was used for all electrons (no atom heavier than Kr, which would carry an effective core "
                  "potential). "]
    return parts + _fitting_sentence(level, basis)


def _fitting_sentence(level, basis: str) -> list:
    if not level.density_fit:
        return [f"Two-electron integrals in {basis_name(basis)} were computed without density fitting. "]
    auxiliary = auxiliary_basis(level, basis)
    integrals = "Coulomb and exchange" if level.method == "hf" or exact_exchange_percent(level) > 0 else "Coulomb"
    parts = [f"{integrals} integrals in {basis_name(basis)} were density-fitted with "]
    if auxiliary is None:
        return parts + ["an even-tempered auxiliary basis generated by PySCF. "]
    key = {"def2-universal-jkfit": "weigend2008-jkfit", "def2-universal-jfit": "weigend2006-jfit"}.get(auxiliary)
    parts += [f"the {auxiliary} auxiliary basis "]
    if key:
        parts += [_cite(key), " "]
    return parts + ["(PySCF's default for this basis and method). "]


def _solvent_sentence(study, level) -> list:
    from ..compute.levels import level_for_charge

    charged = [e.complex.formula for e in study.complexes if e.complex.charge]
    if level.solvent is None and level.ion_solvent and charged:
        ions = level_for_charge(level, 1)
        return ["Neutral complexes were computed in the gas phase. The charged ones (", ", ".join(charged),
                "), whose highest occupied orbitals lie above zero in the gas phase at this level, were computed "
                "in a continuum in the GFN2-xTB stage (ALPB ", _cite("ehlert2021-alpb"), ") and in the DFT step. ",
                *_pcm_sentence(ions)]
    if level.solvent is None:
        return ["No solvent model was used (gas phase). "]
    return _pcm_sentence(level)


def _pcm_sentence(level) -> list:
    from pyscf import gto
    from pyscf.dft.gen_grid import LEBEDEV_ORDER
    from pyscf.solvent.pcm import PCM

    from ..compute.levels import solvent_epsilon, solvent_source

    defaults = PCM(gto.Mole())  # PySCF's cavity settings, which every calculation used
    source = SOLVENT_SOURCE_KEYS[solvent_source(level.solvent)]
    return ["Solvation was described with the C-PCM model ", _cite("barone1998-cpcm"), f" for {level.solvent} (",
            EPSILON, f" = {solvent_epsilon(level.solvent):g} ", _cite(source), f"; PySCF's cavity of "
            f"{defaults.vdw_scale:g} × Bondi radii ", _cite("bondi1964-radii"), " with "
            f"{LEBEDEV_ORDER[defaults.lebedev_order]} Lebedev points per sphere and the switching/Gaussian "
            "discretisation ", _cite("lange2010-swig"), "). "]


def _grid_sentence(study, level) -> list:
    if level.method != "dft":
        return []
    from pyscf.dft.gen_grid import Grids

    schemes = []
    for attribute in ("radi_method", "becke_scheme"):
        known = GRID_SCHEMES.get(getattr(getattr(Grids, attribute), "__name__", ""))
        if known:
            schemes.append([known[0], " ", _cite(known[1])])
    schemes.append(["Lebedev angular quadrature ", _cite("lebedev1999-quadrature")])
    from ase.data import atomic_numbers

    metals = list(dict.fromkeys(e.complex.metal.symbol for e in study.complexes))
    points = [f"{s} {r} × {a}" for s in metals for r, a in [grid_points(atomic_numbers[s], level.grid_level)]]
    parts = [f"Exchange–correlation integrals used PySCF's integration grid level {level.grid_level} (",
             *_parts_join(schemes), f", pruned; radial × angular points {', '.join(points)})"]
    if level.scf_grid_level is not None and level.scf_grid_level != level.grid_level:
        parts += [f"; each SCF was converged on grid level {level.scf_grid_level} first and finished on level "
                  f"{level.grid_level}"]
    return parts + [". "]


# What fourfold.compute.state_search does for every DFT single point, said once for the methods section.
STATE_SEARCH = ("Each state was converged from several starts: the default (or its relaxation's orbitals), for "
                "open shells a Hückel guess {cite}, the density of the neighbouring spin state converged at the same "
                "geometry, and a density built to the d configuration the ligand-field estimate gives that state; "
                "every open-shell solution was tested for an internal (UKS → UKS) instability, which was followed "
                "downhill, and the lowest solution with the spin character of the state was kept")


def _scf_sentences(level, has_single_point: bool, comparison, state_search: str | None) -> list:
    from ..compute.pyscf_engine import S2_TOLERANCE
    from ..compute.scf_ladder import DAMPING, SHIFT_HARTREE, SMEARING_SIGMA_HARTREE

    s2 = Math("⟨S²⟩", r"$\langle S^2\rangle$")
    parts = ["SCF convergence: energy change below ", _number(level.conv_tol), " ", HARTREE,
             " and orbital gradient below its square root (PySCF's default), at most "
             f"{level.max_cycles} cycles per attempt. An SCF that did not converge with DIIS from the start density "
             "(PySCF's minimal-basis guess, or the orbitals of the preceding calculation of the same state) was "
             "continued from its last density with a level shift of ", _number(SHIFT_HARTREE), " ", HARTREE,
             f" and damping of {DAMPING:g}, then with second-order (Newton) SCF, and last from a Fermi-smeared "
             "density (", Math("σ", r"$\sigma$"), " = ", _number(SMEARING_SIGMA_HARTREE), " ", HARTREE,
             ") followed by an integer-occupation SCF. Open shells were treated unrestricted. Singlets were "
             "computed restricted first and tested for an RKS → UKS (RHF → UHF) instability; where a lower "
             "broken-symmetry UKS solution exists, it is the singlet reported, with its ", s2, ". "]
    projected = comparison is None or any(r.projected_energy_hartree is not None for c in comparison.complexes
                                          for r in [*c.records, *c.path_records])
    if has_single_point and projected:
        parts += ["Broken-symmetry singlet energies were spin-projected with Yamaguchi's formula ",
                  _cite("yamaguchi1988-projection"), " using the triplet at the same geometry. "]
    parts += ["States with ", Math(f"|⟨S²⟩ − S(S+1)| > {S2_TOLERANCE:g}", rf"$|\langle S^2\rangle - S(S+1)| > "
                                   rf"{S2_TOLERANCE:g}$"), " are flagged as spin-contaminated. "]
    if state_search:
        return parts + [state_search.strip().rstrip(".") + ". "]
    before, after = STATE_SEARCH.split("{cite}")
    return parts + [before, _cite("lehtola2019-guess"), after + ". "]


def _analysis_sentences(level, thermochemistry: str | None) -> list:
    if thermochemistry:
        parts = [thermochemistry.strip().rstrip(".") + ". "]
    else:
        if level.method == "xtb":
            what = "GFN2-xTB total energies"
        else:
            terms = ["SCF energy"] + (["D3(BJ) dispersion"] if level.dispersion else []) + (
                ["C-PCM solvation"] if level.solvent else [])
            what = f"total electronic energies ({' + '.join(terms)})"
        parts = [f"Relative energies are {what}; no frequencies were computed, so they carry no zero-point or "
                 "thermal corrections. "]
    parts += ["Energies were converted with the CODATA 2018 constants ", _cite("tiesinga2021-codata2018"),
              ". The shape of every structure is given by ", Math("τ₄", r"$\tau_4$"), " ", _cite("yang2007-tau4"), ", ",
              Math("τ₄′", r"$\tau_4'$"), " ", _cite("okuniewski2015-tau4prime"),
              " and continuous shape measures ", _cite("pinsky1998-cshm"),
              " against the ideal four-vertex reference shapes. A ligand-field estimate from the angular overlap "
              "model ", _cite("schaffer1965-aom"), " is reported beside the computed energies"]
    if level.method in ("hf", "dft"):
        parts += ["; the computed d-orbital energies come from the converged Kohn–Sham (Fock) operator projected "
                  "onto Löwdin-orthogonalised ", _cite("lowdin1950-orthogonalisation"),
                  " metal d functions, fitted with angular-overlap parameters"]
    return parts + ["."]


@dataclass(frozen=True)
class MethodsText:
    markdown: str
    latex: str
    bibtex: str
    keys: tuple[str, ...]  # cited keys in the order of first citation


def _energy_paragraph(study, level, comparison, state_search, w: _Writer) -> list:
    """Functional, basis, fitting, solvent, grids, SCF policy; single points in a larger basis where asked."""
    if level.geometry_from == "xtb":
        role, has_single_point = "Energies are single points on these structures with", True
    else:
        role, has_single_point = "Structures were then relaxed with", level.single_point_basis is not None
    parts = [*_functional_sentence(level, role, w), *_basis_sentence(study, level), *_solvent_sentence(study, level),
             *_grid_sentence(study, level)]
    if level.geometry_from != "xtb" and has_single_point:
        basis = level.single_point_basis
        parts += ["Final energies are single points on these structures with the ", basis_name(basis),
                  " basis set", *([" ", _cite("weigend2005-def2")] if basis.startswith("def2") else []),
                  " and otherwise the same settings. ", *_fitting_sentence(level, basis)]
    return parts + _scf_sentences(level, has_single_point, comparison, state_search)


def methods_text(study, versions: dict, comparison=None, state_search: str | None = None,
                 thermochemistry: str | None = None) -> MethodsText:
    """The computational-details text of ``study`` with the code ``versions`` that ran (``method_versions()``).

    ``comparison`` (optional) narrows the text to what the results hold (spin projection only where a
    projected singlet exists). ``state_search`` and ``thermochemistry`` are sentences describing those steps
    when a study ran them; without ``thermochemistry`` the text says that no frequencies were computed.
    """
    level = study.level
    w = _Writer(dict(versions))
    structure = [*_states_sentence(study), *_relaxation_sentences(study)]
    if level.method == "xtb":
        structure += [*_xtb_sentence(level, "Structures were relaxed and their energies computed with"),
                      "GFN2-xTB spin-state energies serve as a screen only."]
        paragraphs = [_codes_paragraph(level, w), structure]
    else:
        role = "Structures were relaxed with" if level.geometry_from == "xtb" else "Starts were pre-relaxed (held) with"
        structure += _xtb_sentence(level, role)
        paragraphs = [_codes_paragraph(level, w), structure,
                      _energy_paragraph(study, level, comparison, state_search, w)]
    paragraphs.append(_analysis_sentences(level, thermochemistry))
    keys = list(dict.fromkeys(k for p in paragraphs for part in p if isinstance(part, Cite) for k in part.keys))
    markdown = "\n\n".join(_render(p, "md").strip() for p in paragraphs) + "\n"
    latex = "\n\n".join(_render(p, "tex").strip() for p in paragraphs) + "\n"
    return MethodsText(markdown, latex, _bibtex(keys, w), tuple(keys))


def _bibtex(keys: list[str], w: _Writer) -> str:
    known = {**bundled_references(), **w.made}
    missing = [k for k in keys if k not in known]
    if missing:
        raise InputError(f"references.bib has no entry {', '.join(missing)}: add it to fourfold/data/references.bib")
    out = []
    for key in keys:
        entry = BibEntry(known[key].kind, key, dict(known[key].fields))
        if key in SOFTWARE_ENTRIES:
            entry.fields["version"] = w.versions.get(SOFTWARE_ENTRIES[key], "absent")
        out.append(entry.to_bibtex())
    return "% Works cited by methods.md and methods.tex (written by fourfold).\n\n" + "\n".join(out)


# ------------------------------------------------------------------------------------------- files

_TEX_TO_TEXT = {r'{\"a}': "ä", r'{\"o}': "ö", r'{\"u}': "ü", r"{\o}": "ø", r"{\ss}": "ß", r"{\'e}": "é",
                r"{\l}": "ł", r"$\tau_4$": "τ4", "---": "—", "--": "–"}


def _plain(value: str) -> str:
    """A BibTeX field as plain text for Markdown: the accents and signs references.bib uses, braces dropped."""
    for tex, text in _TEX_TO_TEXT.items():
        value = value.replace(tex, text)
    return re.sub(r"\\url\{([^}]*)\}", r"\1", value).replace("{", "").replace("}", "")


def _people(names: str) -> str:
    people = []
    for name in names.split(" and "):
        last, _, first = name.partition(",")
        people.append("et al." if name.strip() == "others" else f"{first.strip()} {last.strip()}".strip())
    if people[-1] == "et al.":
        return ", ".join(people[:-1]) + " et al."
    return ", ".join(people)


def reference_line(entry: BibEntry) -> str:
    """One entry as a Markdown list item: `key`: authors, title, journal year, volume, pages, DOI, notes."""
    f = {name: _plain(value) for name, value in entry.fields.items()}
    who = _people(f.get("author") or f.get("editor", ""))
    parts = [p for p in (who, f"“{f['title']}”" if "title" in f else "") if p]
    where = " ".join(p for p in (f"*{f['journal']}*" if "journal" in f else "", f"**{f['year']}**" if "year" in f
                                 else "") if p)
    parts += [p for p in (where, f.get("volume"), f.get("pages"), f.get("howpublished"), f.get("publisher"))
              if p]
    if "version" in f:
        parts.append(f"version {f['version']}")
    if "doi" in f:
        parts.append(f"doi:{f['doi']}")
    if "note" in f:
        parts.append(f"[{f['note']}]")
    return f"- `{entry.key}`: " + ", ".join(parts) + "."


def study_versions(folder) -> dict[str, str]:
    """Versions for a study folder's methods text: those its run recorded (versions.json) over the installed
    ones (``method_versions()``) for the codes the record lacks."""
    import json

    versions = method_versions()
    recorded = Path(folder) / "versions.json"
    if recorded.exists():
        versions.update(json.loads(recorded.read_text(encoding="utf-8")))
    return versions


def methods_files(study, versions: dict, comparison=None, safety_markdown: str = "",
                  formats=("md", "tex")) -> dict[str, str]:
    """File name -> text of methods.md (the text, its reference list, then ``safety_markdown``) when "md" is in
    ``formats``, methods.tex when "tex" is, and references.bib with either."""
    if not {"md", "tex"} & set(formats):
        return {}
    text = methods_text(study, versions, comparison)
    entries = parse_bibtex(text.bibtex)
    markdown = "\n".join([f"# Computational details: {study.title}", "",
                          "Citations are pandoc keys ([@key]) of references.bib in this folder.", "",
                          text.markdown, "## References", "", *(reference_line(entries[k]) for k in text.keys), ""])
    if safety_markdown:
        markdown += "\n" + safety_markdown
    latex = "\n".join([f"% Computational details: {tex_escape(study.title)}. Written by fourfold "
                       f"{versions.get('fourfold', 'absent')}.",
                       r"% The \cite keys are entries of references.bib in this folder (\bibliography{references}).",
                       "", text.latex])
    files = {"methods.md": markdown, "methods.tex": latex}
    return {**{name: body for name, body in files.items() if name.rpartition(".")[2] in formats},
            "references.bib": text.bibtex}
