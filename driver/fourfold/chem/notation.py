"""A formula as a file or folder name: the one slug every output file, log and study folder uses."""

from __future__ import annotations

import re


def formula_slug(formula: str) -> str:
    """A file-name stem: '[NiCl2(PMe3)2]' -> 'NiCl2PMe32', '[NiCl4]2-' -> 'NiCl4_2-' (charge after an underscore)."""
    if "]" in formula:
        cut = formula.rindex("]") + 1
        body, charge = formula[:cut], formula[cut:]
    else:
        body, charge = formula, ""
    stem = re.sub(r"[^A-Za-z0-9]", "", body)
    return stem + (f"_{re.sub(r'[^0-9+-]', '', charge)}" if charge else "")


def charge_written(formula: str) -> bool:
    """Whether a formula as typed states its charge ('[NiCl4]2-', '[Ni(NH3)4]2+'), or leaves it to be assumed 0."""
    text = formula.strip().replace("−", "-").replace("⁻", "-").replace("⁺", "+")
    return text.endswith(("+", "-"))
