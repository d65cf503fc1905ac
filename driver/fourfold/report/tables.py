"""The comparison as tables: per complex and per study; tidy CSV, Markdown, LaTeX (booktabs) and JSON.

Tables (``study_tables``):
  states        one row per computed state (complex × arrangement × isomer × 2S × relaxation kind)
  states_<cx>   per complex, for reading: held and free energies and the estimate side by side
  deltas        ΔE(SP-4 − T-4) per complex and 2S, computed and estimated, with their difference
  summary       one row per complex: ground states computed and estimated, agreement, ΔE, tau4
  ligand_field  AOM e_σ/e_π fitted to the calculated d block beside the values the estimate used
  path          the D2d path points (when the recipe asks for them)

CSV and JSON carry full precision and machine column names with the unit in the name
(``relative_energy_kj_mol``; ``_cm-1`` for wavenumbers); Markdown and LaTeX are rounded for reading. Energies
are shown in one unit chosen by the caller (kJ/mol by default); AOM parameters always in cm⁻¹, the unit
they are quoted in. Relative energies come from the stored hartree values through fourfold.units only.
Warnings (the GFN2-xTB caveat among them) go below every energy table and into each CSV row they concern.
"""

from __future__ import annotations

import csv
import io
import json
import re
from dataclasses import dataclass, field

from ..chem.complex import spin_label
from ..units import UNIT_LABELS, canonical_unit, convert_energy
from .markup import formula_latex, formula_unicode, multiplicity_word, slug
from .text import UNIT_DIGITS, UNIT_HEADERS

ENERGY_UNITS = ("kj", "kcal", "ev", "cm")
FORMATS = ("csv", "md", "tex", "json")
_SUFFIX = {"kj_mol": "kj_mol", "kcal_mol": "kcal_mol", "ev": "ev", "cm": "cm-1", "hartree": "hartree"}
_TEX_UNIT = {"kj_mol": r"kJ\,mol$^{-1}$", "kcal_mol": r"kcal\,mol$^{-1}$", "ev": "eV", "cm": r"cm$^{-1}$",
             "hartree": r"$E_\mathrm{h}$"}
_ARRANGEMENT_ORDER = {"T-4": 0, "SP-4": 1, "SS-4": 2, "vTBPY-4": 3}


@dataclass(frozen=True)
class Column:
    key: str  # machine name (CSV, JSON), unit in the name
    text: str  # header for Markdown
    tex: str  # header for LaTeX
    kind: str = "text"  # text | formula | number | bool
    digits: int = 1
    where: str = "all"  # all | data (CSV/JSON only) | display (Markdown/LaTeX only)


@dataclass
class Table:
    name: str  # file stem
    title: str  # may hold "{formula}", filled in each output's markup
    columns: list[Column]
    rows: list[dict]
    notes: list[str] = field(default_factory=list)  # caveats
    findings: list[str] = field(default_factory=list)  # verdict lines printed under the table
    tidy: bool = True  # exported as CSV/JSON (display-only tables are not)
    display: bool = True  # written as Markdown/LaTeX (the long tidy states table is not: per-complex ones are)
    formula: str = ""

    def heading(self, style: str) -> str:
        """The title in Markdown ('md') or LaTeX ('tex'), the formula marked up."""
        mark, escape = (formula_latex, tex_escape) if style == "tex" else (formula_unicode, str)
        return mark(self.formula).join(escape(part) for part in self.title.split("{formula}"))

    def column(self, key: str) -> list:
        return [row.get(key) for row in self.rows]


def unit_suffix(unit: str) -> str:
    """Column-name suffix of an energy unit: 'kj' -> 'kj_mol', 'cm' -> 'cm-1'."""
    return _SUFFIX[canonical_unit(unit)]


def _energy_column(key_stem: str, text: str, tex: str, unit: str, where: str = "all") -> Column:
    u = canonical_unit(unit)
    return Column(f"{key_stem}_{_SUFFIX[u]}", f"{text} / {UNIT_HEADERS[u]}", f"{tex} / {_TEX_UNIT[u]}", "number",
                  UNIT_DIGITS[u], where)


def _in(value_kj_mol, unit):
    return None if value_kj_mol is None else convert_energy(value_kj_mol, "kj", unit)


def _sorted_records(records):
    return sorted(records, key=lambda r: (_ARRANGEMENT_ORDER.get(r.arrangement, 9), r.isomer, r.spin2s, r.kind))


def _note(record) -> str:
    if record.status != "done":
        return record.status if not record.reason else f"{record.status}: {record.reason}"
    if record.broken_symmetry:
        return "broken-symmetry singlet"
    if record.spin_contaminated:
        return "spin contaminated"
    if record.converged is False:
        return "relaxation not converged"
    return ""


def _state_words(arrangement: str, isomer: str, spin2s: int) -> str:
    return f"{arrangement} {isomer}".strip() + f", {multiplicity_word(spin2s)}"


def states_table(comparison, unit: str) -> Table:
    """Tidy: one row per state and relaxation kind, every complex."""
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("d_electrons", "dⁿ", "$d^n$", "number", 0),
        Column("arrangement", "arrangement", "arrangement"),
        Column("isomer", "isomer", "isomer"),
        Column("spin2s", "2S", "$2S$", "number", 0),
        Column("multiplicity", "2S+1", "$2S+1$", "number", 0, "data"),
        Column("spin_state", "spin", "spin"),
        Column("relaxation", "relaxation", "relaxation"),
        Column("status", "status", "status"),
        Column("converged", "converged", "conv.", "bool"),
        Column("energy_hartree", "E / Eh", r"$E$ / $E_\mathrm{h}$", "number", 6),
        _energy_column("relative_energy", "ΔE calc", r"$\Delta E_\mathrm{calc}$", unit),
        _energy_column("estimate_energy", "ΔE est", r"$\Delta E_\mathrm{est}$", unit),
        Column("s2", "⟨S²⟩", r"$\langle S^2\rangle$", "number", 2),
        Column("s2_expected", "S(S+1)", "$S(S+1)$", "number", 2, "data"),
        Column("spin_contaminated", "contaminated", "contam.", "bool", where="data"),
        Column("broken_symmetry", "broken symmetry", "BS", "bool", where="data"),
        Column("tau4", "τ₄", r"$\tau_4$", "number", 2),
        Column("tau4_prime", "τ₄′", r"$\tau_4'$", "number", 2),
        Column("nearest_shape", "nearest shape", "shape"),
        Column("engine", "engine", "engine", where="data"),
        Column("level", "level", "level", where="data"),
        Column("note", "note", "note", where="data"),
        Column("warnings", "warnings", "warnings", where="data"),
        Column("job_key", "job key", "job key", where="data"),
    ]
    rows = []
    for c in comparison.complexes:
        for r in _sorted_records(c.records):
            rows.append({
                "formula": c.formula, "d_electrons": c.d_electrons, "arrangement": r.arrangement, "isomer": r.isomer,
                "spin2s": r.spin2s, "multiplicity": r.spin2s + 1, "spin_state": multiplicity_word(r.spin2s),
                "relaxation": r.kind, "status": r.status, "converged": r.converged, "energy_hartree": r.energy_hartree,
                columns[11].key: _in(r.relative_kj_mol, unit), columns[12].key: _in(r.estimate_kj_mol, unit),
                "s2": r.s2, "s2_expected": r.s2_expected, "spin_contaminated": r.spin_contaminated,
                "broken_symmetry": r.broken_symmetry, "tau4": r.tau4, "tau4_prime": r.tau4_prime,
                "nearest_shape": r.nearest_shape, "engine": r.engine, "level": c.level, "note": _note(r),
                "warnings": "; ".join(r.warnings), "job_key": r.job_key,
            })
    return Table("states", "Every computed state", columns, rows, list(comparison.warnings), display=False)


def complex_table(c, unit: str, warnings: list[str]) -> Table:
    """For reading: one row per arrangement × isomer × 2S, held and free energies beside the estimate."""
    kinds = [k for k in ("held", "free") if any(r.kind == k for r in c.records)]
    shape_kind = "free" if "free" in kinds else (kinds[0] if kinds else "held")
    columns = [Column("state", "state", "state"), Column("spin", "spin", "spin")]
    for kind in kinds:
        columns.append(_energy_column(f"relative_energy_{kind}", f"ΔE {kind}", rf"$\Delta E_\mathrm{{{kind}}}$", unit))
    columns += [
        _energy_column("estimate_energy", "ΔE est", r"$\Delta E_\mathrm{est}$", unit),
        Column("s2", "⟨S²⟩", r"$\langle S^2\rangle$", "number", 2),
        Column("tau4", f"τ₄ ({shape_kind})", rf"$\tau_4$ ({shape_kind})", "number", 2),
        Column("tau4_prime", f"τ₄′ ({shape_kind})", rf"$\tau_4'$ ({shape_kind})", "number", 2),
        Column("nearest_shape", f"shape ({shape_kind})", f"shape ({shape_kind})"),
        Column("converged", "converged", "conv."),
        Column("note", "note", "note"),
    ]
    groups: dict[tuple, dict] = {}
    for r in _sorted_records(c.records):
        groups.setdefault((r.arrangement, r.isomer, r.spin2s), {})[r.kind] = r
    rows = []
    for (arrangement, isomer, spin2s), by_kind in groups.items():
        first = by_kind.get("held") or next(iter(by_kind.values()))
        shaped = by_kind.get(shape_kind, first)
        row = {"state": f"{arrangement} {isomer}".strip(), "spin": spin_label(spin2s), "s2": first.s2,
               "tau4": shaped.tau4, "tau4_prime": shaped.tau4_prime,
               "nearest_shape": shaped.nearest_shape}
        for kind in kinds:
            r = by_kind.get(kind)
            row[f"relative_energy_{kind}_{unit_suffix(unit)}"] = None if r is None else _in(r.relative_kj_mol, unit)
        row[f"estimate_energy_{unit_suffix(unit)}"] = _in(first.estimate_kj_mol, unit)
        row["converged"] = " / ".join(f"{k}: {_yes_no(by_kind[k].converged)}" if len(kinds) > 1
                                      else _yes_no(by_kind[k].converged) for k in kinds if k in by_kind)
        row["note"] = "; ".join(f"{k}: {n}" if len(kinds) > 1 else n
                                for k in kinds if k in by_kind and (n := _note(by_kind[k])))
        rows.append(row)
    title = f"{{formula}} (d{c.d_electrons}), level {c.level}: energies relative to the lowest state"
    return Table(f"states_{slug(c.formula)}", title, columns, rows, _complex_warnings(c, warnings),
                 _verdicts(c, unit), tidy=False, formula=c.formula)


def _verdicts(c, unit: str) -> list[str]:
    """Computed vs estimated ground state, then ΔE(SP-4 − T-4) per spin with the difference."""
    u = canonical_unit(unit)
    digits, label = UNIT_DIGITS[u], UNIT_HEADERS[u]
    g, e = c.computed_ground, c.estimate.ground
    computed = "not computed" if g is None else _state_words(g.arrangement, g.isomer, g.spin2s)
    verdict = "" if c.agrees() is None else (" (agree)" if c.agrees() else " (disagree)")
    lines = [f"Ground state: computed {computed}; estimated {_state_words(e.arrangement, e.isomer, e.spin2s)}{verdict}."]
    calc, est = c.delta_sp_t_kj_mol(), c.estimated_delta_kj_mol()
    for spin2s in sorted(set(calc) | set(est)):
        a, b = _in(calc.get(spin2s), unit), _in(est.get(spin2s), unit)
        shown = ["—" if v is None else f"{v:+.{digits}f}".replace("-", "−") for v in (a, b)]
        difference = "" if a is None or b is None else f", difference {a - b:+.{digits}f}".replace("-", "−")
        lines.append(f"ΔE(SP-4 − T-4), {multiplicity_word(spin2s)}: computed {shown[0]} {label}, "
                     f"estimated {shown[1]} {label}{difference}.")
    return lines


def _complex_warnings(c, warnings: list[str]) -> list[str]:
    own = {w for r in c.records for w in r.warnings}
    return [w for w in warnings if w in own or c.formula in w]


def _yes_no(value) -> str:
    return "—" if value is None else ("yes" if value else "no")


def deltas_table(comparison, unit: str) -> Table:
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("spin2s", "2S", "$2S$", "number", 0),
        Column("spin_state", "spin", "spin"),
        _energy_column("delta_computed", "ΔE(SP-4 − T-4) calc", r"$\Delta E_\mathrm{calc}$", unit),
        _energy_column("delta_estimated", "ΔE(SP-4 − T-4) est", r"$\Delta E_\mathrm{est}$", unit),
        _energy_column("difference", "calc − est", r"calc $-$ est", unit),
    ]
    rows = []
    for c in comparison.complexes:
        calc, est = c.delta_sp_t_kj_mol(), c.estimated_delta_kj_mol()
        for spin2s in sorted(set(calc) | set(est)):
            a, b = calc.get(spin2s), est.get(spin2s)
            rows.append({"formula": c.formula, "spin2s": spin2s, "spin_state": multiplicity_word(spin2s),
                         columns[3].key: _in(a, unit), columns[4].key: _in(b, unit),
                         columns[5].key: None if a is None or b is None else _in(a - b, unit)})
    return Table("deltas", "ΔE(SP-4 − T-4) per spin state (lowest isomer of each; positive: T-4 lower)", columns, rows,
                 list(comparison.warnings))


def summary_table(comparison, unit: str) -> Table:
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("d_electrons", "dⁿ", "$d^n$", "number", 0),
        Column("computed_ground", "ground state (calc)", "ground state (calc)"),
        Column("estimated_ground", "ground state (est)", "ground state (est)"),
        Column("agree", "agree", "agree", "bool"),
        _energy_column("delta_computed", "ΔE calc", r"$\Delta E_\mathrm{calc}$", unit),
        _energy_column("delta_estimated", "ΔE est", r"$\Delta E_\mathrm{est}$", unit),
        Column("tau4_ground", "τ₄ (ground)", r"$\tau_4$ (ground)", "number", 2),
        Column("computed_ground_arrangement", "", "", where="data"),
        Column("computed_ground_isomer", "", "", where="data"),
        Column("computed_ground_spin2s", "", "", "number", 0, "data"),
        Column("estimated_ground_arrangement", "", "", where="data"),
        Column("estimated_ground_isomer", "", "", where="data"),
        Column("estimated_ground_spin2s", "", "", "number", 0, "data"),
    ]
    rows = []
    for c in comparison.complexes:
        g, e = c.computed_ground, c.estimate.ground
        rows.append({
            "formula": c.formula, "d_electrons": c.d_electrons,
            "computed_ground": None if g is None else _state_words(g.arrangement, g.isomer, g.spin2s),
            "estimated_ground": _state_words(e.arrangement, e.isomer, e.spin2s), "agree": c.agrees(),
            columns[5].key: _in(c.lowest_delta_sp_t_kj_mol(), unit),
            columns[6].key: _in(c.estimated_lowest_delta_sp_t_kj_mol(), unit),
            "tau4_ground": None if g is None else g.tau4,
            "computed_ground_arrangement": None if g is None else g.arrangement,
            "computed_ground_isomer": None if g is None else g.isomer,
            "computed_ground_spin2s": None if g is None else g.spin2s,
            "estimated_ground_arrangement": e.arrangement, "estimated_ground_isomer": e.isomer,
            "estimated_ground_spin2s": e.spin2s,
        })
    title = (f"{comparison.title}, level {comparison.level}: ground states; ΔE = E(lowest SP-4 state) − "
             "E(lowest T-4 state), positive: tetrahedral")
    return Table("summary", title, columns, rows, list(comparison.warnings))


def ligand_field_table(comparison) -> Table:
    """Fitted AOM parameters of the lowest computed state of each arrangement beside the estimate's inputs."""
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("state", "fitted on", "fitted on"),
        Column("ligand", "ligand", "ligand"),
        Column("e_sigma_fitted_cm-1", "e_σ fit / cm⁻¹", r"$e_\sigma$ fit / cm$^{-1}$", "number", 0),
        Column("e_pi_fitted_cm-1", "e_π fit / cm⁻¹", r"$e_\pi$ fit / cm$^{-1}$", "number", 0),
        Column("e_pi_tied", "e_π tied", r"$e_\pi$ tied", "bool"),
        Column("e_sigma_estimate_cm-1", "e_σ est / cm⁻¹", r"$e_\sigma$ est / cm$^{-1}$", "number", 0),
        Column("e_pi_estimate_cm-1", "e_π est / cm⁻¹", r"$e_\pi$ est / cm$^{-1}$", "number", 0),
        Column("e_sigma_source", "", "", where="data"),
    ]
    rows = []
    for c in comparison.complexes:
        fitted = _lowest_per_arrangement([r for r in c.held_or_free() if r.fitted_e_sigma_cm])
        params = c.estimate.parameters.ligands
        sources = fitted or [None]
        for record in sources:
            for name, p in params.items():
                rows.append({
                    "formula": c.formula,
                    "state": None if record is None else _state_words(record.arrangement, record.isomer, record.spin2s),
                    "ligand": name,
                    "e_sigma_fitted_cm-1": None if record is None else record.fitted_e_sigma_cm.get(name),
                    "e_pi_fitted_cm-1": None if record is None else (record.fitted_e_pi_cm or {}).get(name),
                    "e_pi_tied": None if record is None else record.fit_tied_pi,
                    "e_sigma_estimate_cm-1": p.e_sigma_cm.value, "e_pi_estimate_cm-1": p.e_pi_cm.value,
                    "e_sigma_source": p.e_sigma_cm.source,
                })
    notes = ["Fits: least squares to the Kohn–Sham d block projected on the metal (e_π tied to e_σ by the "
             "ligand's default ratio where the arrangement cannot separate them, as in T-4)."]
    if not any(r["state"] for r in rows):
        notes.append(f"No calculated ligand field at level {comparison.level}: only the estimate's parameters "
                     "are listed (the d block comes from a DFT calculation).")
    return Table("ligand_field", "AOM parameters: fitted to the calculation vs used by the estimate", columns, rows,
                 notes)


def _lowest_per_arrangement(records):
    best = {}
    for r in records:
        key = (r.arrangement, r.isomer)
        if key not in best or r.energy_hartree < best[key].energy_hartree:
            best[key] = r
    return [best[k] for k in sorted(best, key=lambda k: (_ARRANGEMENT_ORDER.get(k[0], 9), k[1]))]


def path_table(comparison, unit: str) -> Table:
    columns = [
        Column("formula", "complex", "complex", "formula"),
        Column("isomer", "isomer", "isomer"),
        Column("trans_angle_deg", "trans angle / °", r"trans angle / $^\circ$", "number", 1),
        Column("spin2s", "2S", "$2S$", "number", 0),
        Column("spin_state", "spin", "spin"),
        Column("status", "status", "status"),
        Column("converged", "converged", "conv.", "bool"),
        Column("energy_hartree", "E / Eh", r"$E$ / $E_\mathrm{h}$", "number", 6),
        _energy_column("relative_energy", "ΔE", r"$\Delta E$", unit),
        Column("tau4", "τ₄", r"$\tau_4$", "number", 2),
        Column("engine", "engine", "engine", where="data"),
        Column("warnings", "warnings", "warnings", where="data"),
        Column("job_key", "job key", "job key", where="data"),
    ]
    rows = []
    for c in comparison.complexes:
        for r in sorted(c.path_records, key=lambda r: (r.isomer, r.spin2s, r.trans_angle_deg)):
            rows.append({"formula": c.formula, "isomer": r.isomer, "trans_angle_deg": r.trans_angle_deg,
                         "spin2s": r.spin2s, "spin_state": multiplicity_word(r.spin2s), "status": r.status,
                         "converged": r.converged, "energy_hartree": r.energy_hartree,
                         columns[8].key: _in(r.relative_kj_mol, unit), "tau4": r.tau4, "engine": r.engine,
                         "warnings": "; ".join(r.warnings), "job_key": r.job_key})
    return Table("path", "D2d path T-4 → SP-4 (held relaxations; energies on the zero of the states table)",
                 columns, rows, list(comparison.warnings))


def study_tables(comparison, unit: str = "kj") -> list[Table]:
    """Every table of a comparison in one energy unit; the path table only when the study has path points."""
    unit = canonical_unit(unit)
    tables = [summary_table(comparison, unit), deltas_table(comparison, unit), states_table(comparison, unit)]
    tables += [complex_table(c, unit, comparison.warnings) for c in comparison.complexes]
    tables.append(ligand_field_table(comparison))
    if any(c.path_records for c in comparison.complexes):
        tables.append(path_table(comparison, unit))
    return tables


# ---- writers -------------------------------------------------------------------------------------------

def _data_columns(table: Table) -> list[Column]:
    return [c for c in table.columns if c.where != "display"]


def _display_columns(table: Table) -> list[Column]:
    return [c for c in table.columns if c.where != "data"]


def _csv_value(value):
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)  # shortest text that reads back to the same float
    return value


def to_csv(table: Table) -> str:
    columns = _data_columns(table)
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow([c.key for c in columns])
    for row in table.rows:
        writer.writerow([_csv_value(row.get(c.key)) for c in columns])
    return out.getvalue()


def _shown(value, column: Column, style: str) -> str:
    empty = "—" if style == "md" else "--"
    if value is None or value == "":
        return empty
    if column.kind == "bool" or isinstance(value, bool):
        return "yes" if value else "no"
    if column.kind == "number" and isinstance(value, (int, float)):
        text = f"{value:.{column.digits}f}"
        if text.lstrip("-").strip("0.") == "":
            text = text.lstrip("-")  # no "−0.0"
        return text.replace("-", "−") if style == "md" else f"${text}$"
    if column.kind == "formula":
        return formula_unicode(value) if style == "md" else formula_latex(value)
    return _md_escape(str(value)) if style == "md" else tex_escape(str(value))


def _md_escape(text: str) -> str:
    return text.replace("|", "\\|")


def to_markdown(table: Table, heading_level: int = 3, skip_notes=()) -> str:
    columns = _display_columns(table)
    lines = [f"{'#' * heading_level} {table.heading('md')}", ""]
    lines.append("| " + " | ".join(c.text for c in columns) + " |")
    lines.append("|" + "|".join("---:" if c.kind == "number" else ":---" for c in columns) + "|")
    for row in table.rows:
        lines.append("| " + " | ".join(_shown(row.get(c.key), c, "md") for c in columns) + " |")
    for finding in table.findings:
        lines += ["", finding]
    for note in (n for n in table.notes if n not in skip_notes):
        lines += ["", f"> **Note.** {note}"]
    return "\n".join(lines) + "\n"


_TEX_SPECIAL = {"\\": r"\textbackslash{}", "&": r"\&", "%": r"\%", "$": r"\$", "#": r"\#", "_": r"\_",
                "{": r"\{", "}": r"\}", "~": r"\textasciitilde{}", "^": r"\textasciicircum{}"}
_TEX_UNICODE = {"−": "$-$", "—": "---", "–": "--", "°": r"$^\circ$", "⟨": r"$\langle$", "⟩": r"$\rangle$",
                "²": r"$^2$", "′": "$'$", "τ": r"$\tau$", "σ": r"$\sigma$", "π": r"$\pi$", "Δ": r"$\Delta$",
                "→": r"$\rightarrow$", "×": r"$\times$", "≈": r"$\approx$", "₄": r"$_4$", "⁻": "$^-$", "¹": "$^1$",
                "ⁿ": "$^n$", "Å": r"\AA{}", "ø": r"\o{}", "é": r"\'e", "ü": r'\"u', "ö": r'\"o', "ä": r'\"a'}


_TEX_SYMBOLS = {"e_σ": r"$e_\sigma$", "e_π": r"$e_\pi$", "⁻¹": "$^{-1}$"}  # symbols in notes, set as such
_TEX_SYMBOL_SPLIT = re.compile("(" + "|".join(map(re.escape, _TEX_SYMBOLS)) + ")")


def _tex_characters(text: str) -> str:
    out = []
    for ch in text:
        if ch in _TEX_SPECIAL:
            out.append(_TEX_SPECIAL[ch])
        elif ch in _TEX_UNICODE:
            out.append(_TEX_UNICODE[ch])
        elif ord(ch) < 128:
            out.append(ch)
        else:
            out.append("?")  # pdflatex stops on an unknown character; a visible mark is better
    return "".join(out)


def tex_escape(text: str) -> str:
    """Plain text for LaTeX: specials escaped, the few Unicode signs fourfold writes mapped, others dropped."""
    return "".join(_TEX_SYMBOLS.get(part) or _tex_characters(part) for part in _TEX_SYMBOL_SPLIT.split(text))


def to_latex(table: Table) -> str:
    """A booktabs tabular (no siunitx), then the notes; ready for \\input inside a table float."""
    columns = _display_columns(table)
    spec = "".join("r" if c.kind == "number" else "l" for c in columns)
    lines = [f"% fourfold: {table.heading('tex')}", rf"\begin{{tabular}}{{{spec}}}", r"\toprule",
             " & ".join(c.tex for c in columns) + r" \\", r"\midrule"]
    for row in table.rows:
        cells = [_shown(row.get(c.key), c, "tex") for c in columns]
        # a row opening with "[" (a formula) would be read as the optional argument of the \\ or \midrule before it
        cells[0] = "{}" + cells[0] if cells[0].startswith("[") else cells[0]
        lines.append(" & ".join(cells) + r" \\")
    lines += [r"\bottomrule", r"\end{tabular}"]
    for finding in table.findings:
        lines.append(rf"\par\smallskip{{\footnotesize {tex_escape(finding)}\par}}")
    for note in table.notes:
        lines.append(rf"\par\smallskip{{\footnotesize Note: {tex_escape(note)}\par}}")
    return "\n".join(lines) + "\n"


def latex_document(tables: list[Table], title: str, inputs: list[str]) -> str:
    """A standalone document that \\input's each table file (booktabs and geometry only)."""
    body = []
    for table, name in zip(tables, inputs):
        body += [r"\begin{table}[htbp]\centering\small", rf"\caption{{{table.heading('tex')}}}",
                 rf"\input{{{name}}}", r"\end{table}", ""]
    return "\n".join([r"\documentclass{article}", r"\usepackage[T1]{fontenc}", r"\usepackage{booktabs}",
                      r"\usepackage[margin=15mm,landscape]{geometry}", rf"\title{{{tex_escape(title)}}}", r"\date{}",
                      r"\begin{document}", r"\maketitle", *body, r"\end{document}", ""])


def markdown_report(tables: list[Table], comparison, unit: str) -> str:
    """All tables in one Markdown file: the caveats once at the top, then each table with its own notes."""
    unit = canonical_unit(unit)
    lines = [f"# {comparison.title}", "", f"Level: `{comparison.level}`. Energies in {UNIT_LABELS[unit]} "
             "(CODATA 2018 conversions), relative to each complex's lowest computed state; estimates relative to "
             "the estimate's lowest state.", ""]
    if comparison.warnings:
        lines += ["## Caveats", ""] + [f"- {w}" for w in comparison.warnings] + [""]
    for table in tables:
        lines.append(to_markdown(table, skip_notes=comparison.warnings))
    return "\n".join(lines)


def to_json(tables: list[Table], comparison, unit: str) -> str:
    unit = canonical_unit(unit)
    data = {
        "title": comparison.title, "level": comparison.level, "energy_unit": UNIT_LABELS[unit],
        "column_suffix": _SUFFIX[unit], "warnings": list(comparison.warnings),
        "tables": {t.name: [{c.key: row.get(c.key) for c in _data_columns(t)} for row in t.rows]
                   for t in tables if t.tidy},
        "notes": {t.name: t.notes for t in tables if t.notes},
        "estimates": {c.formula: c.estimate.as_dict() for c in comparison.complexes},
    }
    return json.dumps(data, indent=2, ensure_ascii=False) + "\n"
