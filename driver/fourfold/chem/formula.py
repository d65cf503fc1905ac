"""Formula parser: '[NiCl4]2-', '[Ni(CN)4]2-', '[NiCl2(PMe3)2]', 'Ni(CO)4', '[Ni(II)Cl4]2-', '[Ni(dppe)Cl2]',
'[NiCl2(P(t-Bu)3)2]'.

Grammar (informal): optional square brackets around  METAL [ (ROMAN) ]  LIGAND-GROUP+ , then an optional
charge ('2-', '+', '^2-', '3+'). A ligand group is a ligand name or alias, or one in (balanced)
parentheses, with an optional count. Ligand names are matched longest-first, so 'NiCl2(PMe3)2' reads
Cl ×2 and PMe3 ×2.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from ..errors import InputError, shown
from .ligands import unknown_ligand_error

_ROMAN = {"0": 0, "I": 1, "II": 2, "III": 3, "IV": 4, "V": 5, "VI": 6, "VII": 7, "VIII": 8,
          "-I": -1, "-II": -2}
_CHARGE = re.compile(r"\^?(\d*)([+-])$")
_LONGEST = 200  # characters; the longest formula of the bundled ligands is under 40
_MOST_OF_ONE_LIGAND = 12  # a count beyond any complex: refused before a list of that many ligands is made
_METAL = re.compile(r"([A-Z][a-z]?)(?:\((0|-?I{1,3}|-?IV|VI{0,3})\))?")


@dataclass(frozen=True)
class ParsedFormula:
    metal: str
    ligands: tuple[str, ...]  # ligand names or aliases as written, one per ligand
    charge: int
    oxidation_state: int | None  # only when written as roman numeral


def parse_formula(text: str, ligand_names: dict[str, str]) -> ParsedFormula:
    """Split a formula into metal, ligand tokens and charge; ``ligand_names`` maps every accepted alias to
    its ligand's canonical name (used to list the known ligands in errors)."""
    original = text
    if len(text) > _LONGEST:
        raise InputError(f"formula {shown(text)} is {len(text)} characters long: write one complex, e.g. [NiCl4]2-")
    text = text.strip().replace(" ", "").replace("−", "-").replace("⁻", "-").replace("⁺", "+")
    text = text.translate(str.maketrans("⁰¹²³⁴⁵⁶⁷⁸⁹", "0123456789"))
    if not text:
        raise InputError("empty formula: write e.g. [NiCl4]2-")
    charge, text = _split_charge(original, text)
    if text.startswith("["):
        if not text.endswith("]"):
            raise InputError(f"malformed formula {shown(original)}: a '[' without its closing ']' before the charge")
        text = text[1:-1]
    elif "[" in text or "]" in text:
        raise InputError(f"malformed formula {shown(original)}: brackets must enclose the whole complex, "
                         "e.g. [NiCl4]2-")
    match = _METAL.match(text)
    if not match:
        raise InputError(f"malformed formula {shown(original)}: it must start with the metal's element symbol, "
                         "e.g. [NiCl4]2-")
    metal, roman = match.group(1), match.group(2)
    ligands = _split_ligands(original, text[match.end():], ligand_names)
    return ParsedFormula(metal, tuple(ligands), charge, _ROMAN[roman] if roman else None)


def _split_charge(original: str, text: str) -> tuple[int, str]:
    if re.search(r"\][+-]\d+$", text):
        sign, digits = re.search(r"([+-])(\d+)$", text).groups()
        raise InputError(f"charge of '{original}' written sign first: write the number, then the sign, e.g. "
                         f"{text[: text.rindex(']') + 1]}{digits}{sign}")
    if re.search(r"\]\d+$", text):
        digits = re.search(r"(\d+)$", text).group(1)
        body = text[: text.rindex("]") + 1]
        raise InputError(f"charge '{digits}' of '{original}' has no sign: write {body}{digits}- or {body}{digits}+")
    match = _CHARGE.search(text)
    if not match:
        return 0, text
    body = text[: match.start()]
    if not body.endswith("]") and match.group(1):
        # 'Ni(CO)4' has no charge; '...Cl42-' without brackets is ambiguous: ask for brackets.
        raise InputError(f"ambiguous formula {shown(original)}: put the complex in brackets before its charge, "
                         "e.g. [NiCl4]2-")
    magnitude = int(match.group(1) or 1)
    return (magnitude if match.group(2) == "+" else -magnitude), body


def _split_ligands(original: str, rest: str, known: dict[str, str]) -> list[str]:
    names = sorted(known, key=len, reverse=True)
    ligands: list[str] = []
    position = 0
    while position < len(rest):
        if rest[position] == "(":
            end = _closing_parenthesis(rest, position)
            if end < 0:
                raise InputError(f"malformed formula {shown(original)}: '(' without ')'")
            token = rest[position + 1 : end]
            if token not in names:
                raise unknown_ligand_error(token, known)
            position = end + 1
        else:
            token = next((n for n in names if rest.startswith(n, position)), None)
            if token is None:
                raise unknown_ligand_error(_word_at(rest, position), known)
            position += len(token)
        count_match = re.match(r"\d+", rest[position:])
        count = int(count_match.group(0)) if count_match else 1
        position += count_match.end() if count_match else 0
        if count == 0 or count > _MOST_OF_ONE_LIGAND:
            raise InputError(f"malformed formula {shown(original)}: ligand count {count} for {token}")
        ligands.extend([token] * count)
    if not ligands:
        raise InputError(f"malformed formula {shown(original)}: no ligands after the metal")
    return ligands


def _word_at(text: str, position: int) -> str:
    """The name a reader sees where parsing stopped: the capitalised word around ``position``, so 'NiFoo4'
    reports 'Foo', not the 'o' left after the ligand F matched."""
    start = position
    while start > 0 and not text[start].isupper() and text[start - 1].isalpha():
        start -= 1
    found = re.match(r"[A-Z]?[a-z]+|.", text[start:], re.DOTALL)
    return found.group(0)


def _closing_parenthesis(text: str, start: int) -> int:
    """Index of the ')' matching the '(' at ``start`` (-1 if unbalanced): 'P(t-Bu)3' nests in '(P(t-Bu)3)2'."""
    depth = 0
    for index in range(start, len(text)):
        depth += {"(": 1, ")": -1}.get(text[index], 0)
        if depth == 0:
            return index
    return -1

