"""One table model and its writers: terminal text, Markdown, CSV, LaTeX (booktabs) and JSON rows.

A ``Table`` holds typed columns and plain rows; every output of fourfold that shows a table renders the
same Table, so the terminal, the Markdown report and the files cannot disagree. CSV and JSON carry full
precision and machine column names (``Column.key``, unit in the name); text, Markdown and LaTeX round to
each column's digits for reading.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, field

from .markup import formula_latex, formula_unicode


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
        """The title in Markdown or terminal text ('md', 'text') or LaTeX ('tex'), the formula marked up."""
        mark, escape = {"tex": (formula_latex, tex_escape), "md": (formula_unicode, md_escape)}.get(
            style, (formula_unicode, str))
        return mark(self.formula).join(escape(part) for part in self.title.split("{formula}"))

    def column(self, key: str) -> list:
        return [row.get(key) for row in self.rows]


def _data_columns(table: Table) -> list[Column]:
    return [c for c in table.columns if c.where != "display"]


def _display_columns(table: Table) -> list[Column]:
    return [c for c in table.columns if c.where != "data"]


# A cell a spreadsheet would run as a formula (OWASP, "CSV Injection": cells opening with =, +, -, @, tab or
# carriage return; from memory) gets a leading apostrophe, which spreadsheets show as text.
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def _csv_value(value):
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)  # shortest text that reads back to the same float
    if isinstance(value, str) and value.startswith(_FORMULA_START):
        return "'" + value
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
    """A cell as text for style 'md' (Markdown), 'text' (terminal; Unicode, nothing escaped) or 'tex'."""
    empty = "--" if style == "tex" else "—"
    if value is None or value == "":
        return empty
    if column.kind == "bool" or isinstance(value, bool):
        return "yes" if value else "no"
    if column.kind == "number" and isinstance(value, (int, float)):
        text = f"{value:.{column.digits}f}"
        if text.lstrip("-").strip("0.") == "":
            text = text.lstrip("-")  # no "−0.0"
        return f"${text}$" if style == "tex" else text.replace("-", "−")
    if column.kind == "formula":
        return formula_latex(value) if style == "tex" else formula_unicode(value)
    return {"md": md_escape, "tex": tex_escape}.get(style, str)(str(value))


_MD_SPECIAL = re.compile(r"([\\`*_\[\]<>|#])")


def md_escape(text: str) -> str:
    """Text for Markdown, shown as written: its markup characters escaped, line breaks and other control
    characters made spaces (a table cell or a heading is one line)."""
    text = "".join(c if c.isprintable() else " " for c in text)
    return _MD_SPECIAL.sub(r"\\\1", text)


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
        elif not ch.isprintable():
            out.append(" ")  # a line break or a control character: a heading or a cell is one line
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
    for table, name in zip(tables, inputs, strict=False):
        body += [r"\begin{table}[htbp]\centering\small", rf"\caption{{{table.heading('tex')}}}",
                 rf"\input{{{name}}}", r"\end{table}", ""]
    return "\n".join([r"\documentclass{article}", r"\usepackage[T1]{fontenc}", r"\usepackage{booktabs}",
                      r"\usepackage[margin=15mm,landscape]{geometry}", rf"\title{{{tex_escape(title)}}}", r"\date{}",
                      r"\begin{document}", r"\maketitle", *body, r"\end{document}", ""])


def to_text(table: Table, skip_notes=(), title: bool = True) -> str:
    """Monospace text for the terminal: the title, the columns (units in the headers), findings and notes."""
    columns = _display_columns(table)
    cells = [[_shown(row.get(c.key), c, "text") for c in columns] for row in table.rows]
    widths = [max([len(c.text)] + [len(r[i]) for r in cells]) for i, c in enumerate(columns)]

    def line(values):
        return "  ".join(v.rjust(w) if c.kind == "number" else v.ljust(w)
                         for v, w, c in zip(values, widths, columns, strict=False)).rstrip()

    lines = [table.heading("text"), ""] if title else []
    lines += [line([c.text for c in columns]), "  ".join("-" * w for w in widths)]
    lines += [line(r) for r in cells]
    lines += table.findings
    lines += [f"note: {n}" for n in table.notes if n not in skip_notes]
    return "\n".join(lines) + "\n"


def json_rows(table: Table) -> list[dict]:
    """The rows as JSON-ready dicts of the machine columns."""
    return [{c.key: row.get(c.key) for c in _data_columns(table)} for row in table.rows]
