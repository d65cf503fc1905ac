"""Formulas and orbital names as each output writes them: Unicode, LaTeX, matplotlib mathtext.

A formula is fourfold's canonical text ('[NiCl2(PMe3)2]', '[NiCl4]2-'): counts after an element or a closing
parenthesis are subscripts, the charge after the last ']' is a superscript with a true minus sign.
"""

from __future__ import annotations

import re

_COUNT = re.compile(r"(?<=[A-Za-z)])(\d+)")
_SUBSCRIPTS = str.maketrans("0123456789", "₀₁₂₃₄₅₆₇₈₉")
_SUPERSCRIPTS = str.maketrans("0123456789+-", "⁰¹²³⁴⁵⁶⁷⁸⁹⁺⁻")


def _split_charge(formula: str) -> tuple[str, str]:
    if "]" in formula:
        cut = formula.rindex("]") + 1
        return formula[:cut], formula[cut:]
    return formula, ""


def formula_unicode(formula: str) -> str:
    """'[NiCl4]2-' -> '[NiCl₄]²⁻' (Markdown, terminal)."""
    body, charge = _split_charge(formula)
    return _COUNT.sub(lambda m: m.group(1).translate(_SUBSCRIPTS), body) + charge.translate(_SUPERSCRIPTS)


def formula_latex(formula: str) -> str:
    """'[NiCl4]2-' -> '[NiCl$_{4}$]$^{2-}$' (plain LaTeX, no chemistry package needed)."""
    body, charge = _split_charge(formula)
    text = _COUNT.sub(lambda m: f"$_{{{m.group(1)}}}$", body)
    return text + (f"$^{{{charge}}}$" if charge else "")


_ORBITAL_MATH = {"xy": r"\mathit{xy}", "yz": r"\mathit{yz}", "xz": r"\mathit{xz}", "z2": r"\mathit{z}^2",
                 "x2-y2": r"\mathit{x}^2\!-\!\mathit{y}^2"}  # coordinates in italics


def orbital_mathtext(label: str) -> str:
    """A d-level label as mathtext: 'z2' -> '$d_{z^2}$', 'xz/yz' (mixed) -> '$d_{xz/yz}$', 'xz,yz' -> '$d_{xz,yz}$'."""
    def part(name: str) -> str:
        return "/".join(_ORBITAL_MATH.get(p, p) for p in name.split("/"))

    return "$d_{" + r",\,".join(part(p) for p in label.split(",")) + "}$"


def multiplicity_word(spin2s: int) -> str:
    from ..chem.complex import SPIN_WORDS

    return SPIN_WORDS.get(spin2s + 1, f"{spin2s + 1}-et")
