"""Safety cautions for the compounds in hand, from ``data/hazards.toml`` (by element, ligand family and combination).

:func:`cautions_for` gives the lines that apply to some complexes, each once and in the table's order, and always
ends with the two closing lines: a computed preference is not a substitute for experiment, and the deferral to
local rules, the safety data sheets and the institution's safety officer. :func:`cautions_text` formats them for
stderr, :func:`cautions_markdown` for report.md and methods.md.
"""

from __future__ import annotations

import textwrap
import tomllib
from collections import Counter
from dataclasses import dataclass
from functools import cache

from ..data import load_table
from ..errors import InputError
from .complex import Complex
from .ligands import Ligand, ligand_lookup

COMPUTED_IS_NOT_EXPERIMENT = ("A computed preference (geometry, spin state, energy gap) is not a substitute for "
                              "experimental characterisation of the compound.")
DEFERRAL = ("These notes are reminders, not a risk assessment: before making or handling any of these compounds, "
            "follow your local rules, the safety data sheets and your institution's safety officer.")
CLOSING_LINES = (COMPUTED_IS_NOT_EXPERIMENT, DEFERRAL)

_TEXT_WIDTH = 110
_LABELS_SHOWN = 6  # compounds named in a header or an "applies to" note before "and N more"

_ENTRY_KEYS = {"title", "caution", "sources", "from_memory", "none"}
_ELEMENT_KEYS = _ENTRY_KEYS | {"buildable"}
_FAMILY_KEYS = _ENTRY_KEYS | {"ligands"}
_COMBINATION_KEYS = _ENTRY_KEYS | {"key", "metals", "oxidation_states", "any_family", "all_families", "supersedes"}


@dataclass(frozen=True)
class Source:
    short: str
    full: str


@dataclass(frozen=True)
class Entry:
    """One row of the table; ``text`` is None for an entry marked ``none`` (decided: nothing to say)."""

    key: str
    title: str
    text: str | None
    sources: tuple[Source, ...] = ()
    from_memory: tuple[Source, ...] = ()

    @property
    def citation(self) -> str:
        return "; ".join([s.short for s in self.sources] + [f"{s.short}, from memory" for s in self.from_memory])


@dataclass(frozen=True)
class Combination:
    entry: Entry
    metals: frozenset[str]
    oxidation_states: frozenset[int] | None
    any_family: frozenset[str]
    all_families: frozenset[str]
    supersedes: frozenset[str]  # entry keys

    def applies(self, metal: str, oxidation_state: int | None, families: list[str | None]) -> bool:
        """An unknown oxidation state counts as matching: a caution too many beats one missing."""
        if metal not in self.metals:
            return False
        if self.oxidation_states is not None and oxidation_state is not None \
                and oxidation_state not in self.oxidation_states:
            return False
        if self.any_family and not self.any_family & set(families):
            return False
        return not self.all_families or all(f in self.all_families for f in families)


@dataclass(frozen=True)
class HazardTable:
    elements: dict[str, Entry]
    buildable: dict[str, bool]
    families: dict[str, Entry]
    family_of: dict[str, str]  # ligand name or alias -> family name
    combinations: tuple[Combination, ...]


@dataclass(frozen=True)
class Caution:
    """A caution that applies, with the compounds it applies to."""

    title: str
    text: str
    citation: str
    sources: tuple[Source, ...]
    subjects: tuple[str, ...]


# ---------------------------------------------------------------------------------------------------------
# Loading and checking the table


def _fail(where: str, problem: str) -> InputError:
    return InputError(f"hazard table, {where}: {problem}; fix data/hazards.toml")


def _string_list(where: str, key: str, value) -> list:
    if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
        raise _fail(where, f"'{key}' must be a list of non-empty strings")
    return value


def _entry(where: str, key: str, row, allowed: set, sources: dict[str, Source]) -> Entry:
    if not isinstance(row, dict):
        raise _fail(where, "must be a table")
    unknown = set(row) - allowed
    if unknown:
        raise _fail(where, f"unknown keys {sorted(unknown)} (allowed: {', '.join(sorted(allowed))})")
    if ("caution" in row) == ("none" in row):
        raise _fail(where, "give either 'caution' (with 'title' and sources) or 'none' (why there is nothing to say)")
    if "none" in row:
        if not isinstance(row["none"], str) or not row["none"].strip():
            raise _fail(where, "'none' must say why there is nothing to say")
        if "sources" in row or "from_memory" in row:
            raise _fail(where, "an entry marked 'none' takes no sources")
        return Entry(key=key, title=str(row.get("title", key)), text=None)
    for field in ("title", "caution"):
        if not isinstance(row.get(field), str) or not row[field].strip():
            raise _fail(where, f"'{field}' must be non-empty text")
    cited = {}
    for field in ("sources", "from_memory"):
        cited[field] = _string_list(where, field, row.get(field, []))
        missing = [k for k in cited[field] if k not in sources]
        if missing:
            raise _fail(where, f"'{field}' names {missing[0]!r}, which is not a key of [sources]")
    if not cited["sources"] and not cited["from_memory"]:
        raise _fail(where, "a caution needs at least one key in 'sources' or 'from_memory'")
    return Entry(key=key, title=row["title"].strip(), text=" ".join(row["caution"].split()),
                 sources=tuple(sources[k] for k in cited["sources"]),
                 from_memory=tuple(sources[k] for k in cited["from_memory"]))


def _sources(raw) -> dict[str, Source]:
    if not isinstance(raw, dict) or not raw:
        raise _fail("[sources]", "must be a non-empty table of key = { short, full }")
    sources = {}
    for key, row in raw.items():
        if not isinstance(row, dict) or set(row) != {"short", "full"} \
                or not all(isinstance(v, str) and v.strip() for v in row.values()):
            raise _fail(f"[sources] {key}", "must be { short = \"...\", full = \"...\" } with non-empty text")
        sources[key] = Source(short=row["short"].strip(), full=row["full"].strip())
    return sources


def parse_hazard_table(raw: dict) -> HazardTable:
    """Check a parsed hazards.toml and index it; InputError (one line) says what is malformed."""
    unknown = set(raw) - {"sources", "elements", "ligand_families", "combinations"}
    if unknown:
        raise _fail("top level", f"unknown tables {sorted(unknown)}")
    sources = _sources(raw.get("sources"))

    elements, buildable = {}, {}
    for symbol, row in raw.get("elements", {}).items():
        where = f"[elements.{symbol}]"
        elements[symbol] = _entry(where, f"element:{symbol}", row, _ELEMENT_KEYS, sources)
        if not isinstance(row.get("buildable", True), bool):
            raise _fail(where, "'buildable' must be true or false")
        buildable[symbol] = row.get("buildable", True)

    families, family_of = {}, {}
    for name, row in raw.get("ligand_families", {}).items():
        where = f"[ligand_families.{name}]"
        families[name] = _entry(where, f"family:{name}", row, _FAMILY_KEYS, sources)
        for ligand in _string_list(where, "ligands", row.get("ligands")):
            if ligand in family_of:
                raise _fail(where, f"ligand {ligand!r} is already in family {family_of[ligand]!r}")
            family_of[ligand] = name

    combinations = []
    for index, row in enumerate(raw.get("combinations", [])):
        where = f"[[combinations]] #{index + 1}"
        if not isinstance(row, dict) or not isinstance(row.get("key"), str):
            raise _fail(where, "needs a 'key'")
        entry = _entry(where, f"combination:{row['key']}", row, _COMBINATION_KEYS, sources)
        if entry.text is None:
            raise _fail(where, "a combination must carry a caution")
        metals = _string_list(where, "metals", row.get("metals"))
        referenced = {}
        for field in ("any_family", "all_families"):
            referenced[field] = _string_list(where, field, row.get(field, []))
            if any(f not in families for f in referenced[field]):
                raise _fail(where, f"'{field}' names a family that [ligand_families] lacks")
        supersedes = []
        for name in _string_list(where, "supersedes", row.get("supersedes", [])):
            if name in families:
                supersedes.append(f"family:{name}")
            elif name in elements:
                supersedes.append(f"element:{name}")
            else:
                raise _fail(where, f"'supersedes' names {name!r}, neither a ligand family nor an element")
        states = row.get("oxidation_states")
        if states is not None and (not isinstance(states, list) or not all(isinstance(s, int) for s in states)):
            raise _fail(where, "'oxidation_states' must be a list of integers")
        combinations.append(Combination(entry=entry, metals=frozenset(metals),
                                        oxidation_states=None if states is None else frozenset(states),
                                        any_family=frozenset(referenced["any_family"]),
                                        all_families=frozenset(referenced["all_families"]),
                                        supersedes=frozenset(supersedes)))
    return HazardTable(elements=elements, buildable=buildable, families=families, family_of=family_of,
                       combinations=tuple(combinations))


@cache
def hazard_table() -> HazardTable:
    """The bundled table, checked once per process."""
    try:
        raw = load_table("hazards")
    except tomllib.TOMLDecodeError as error:
        raise InputError(f"data/hazards.toml is not valid TOML ({' '.join(str(error).split())}); fix the file") \
            from None
    return parse_hazard_table(raw)


# ---------------------------------------------------------------------------------------------------------
# Matching compounds to the table


@dataclass(frozen=True)
class _Ligand:
    name: str
    names: tuple[str, ...]  # name and aliases, the keys looked up in the table
    atoms: tuple[str, ...]


@dataclass(frozen=True)
class _Subject:
    label: str
    metal: str
    oxidation_state: int | None
    ligands: tuple[_Ligand, ...]


def _ligand(item) -> _Ligand:
    if isinstance(item, str):
        item = ligand_lookup().get(item, item)
    if isinstance(item, Ligand):
        return _Ligand(item.name, (item.name, *item.aliases), item.symbols)
    return _Ligand(item, (item,), ())


def _subject(item) -> _Subject:
    if isinstance(item, Complex):
        return _Subject(item.formula, item.metal.symbol, item.oxidation_state,
                        tuple(_ligand(lig) for lig in item.ligands))
    if isinstance(item, (tuple, list)) and len(item) in (2, 3) and isinstance(item[0], str) \
            and isinstance(item[1], (tuple, list)) and all(isinstance(x, (str, Ligand)) for x in item[1]):
        ligands = tuple(_ligand(lig) for lig in item[1])
        counts = Counter(lig.name for lig in ligands)
        label = " + ".join([item[0], *(f"{n} {name}" if n > 1 else name for name, n in counts.items())])
        return _Subject(label, item[0], item[2] if len(item) == 3 else None, ligands)
    raise InputError(f"cautions need Complex objects or (metal, [ligand names], oxidation state) tuples, got {item!r}")


def _subjects(complexes) -> list[_Subject]:
    if isinstance(complexes, Complex) or (isinstance(complexes, tuple) and complexes
                                          and isinstance(complexes[0], str)):
        complexes = [complexes]
    return [_subject(item) for item in complexes]


def _family(table: HazardTable, ligand: _Ligand) -> str | None:
    return next((table.family_of[n] for n in ligand.names if n in table.family_of), None)


def _unlisted(name: str) -> Entry:
    return Entry(key=f"unlisted:{name}", title="Unlisted ligand",
                 text=f"'{name}' is not in fourfold's hazard table; read the safety data sheet of the ligand and "
                      "of its precursors.")


def _entries_for(table: HazardTable, subject: _Subject) -> list[Entry]:
    """Every caution that applies to one compound (unordered, may repeat)."""
    families = [_family(table, lig) for lig in subject.ligands]
    fired = [c for c in table.combinations if c.applies(subject.metal, subject.oxidation_state, families)]
    superseded = set().union(*(c.supersedes for c in fired))
    entries = [c.entry for c in fired]
    elements = {subject.metal}
    for ligand, family in zip(subject.ligands, families, strict=False):
        if family is None:  # a ligand the table does not know: its atoms are all we can judge it by
            elements.update(ligand.atoms)
            entries.append(_unlisted(ligand.name))
        else:
            entries.append(table.families[family])
    entries += [table.elements[e] for e in elements if e in table.elements]
    return [e for e in entries if e.text is not None and e.key not in superseded]


def _order(table: HazardTable) -> dict[str, int]:
    keys = [c.entry.key for c in table.combinations] + [e.key for e in table.elements.values()] \
        + [e.key for e in table.families.values()]
    return {key: rank for rank, key in enumerate(keys)}


def _applicable(complexes, table: HazardTable | None = None) -> tuple[list[str], list[Caution]]:
    """The compounds' labels and the cautions for them: once each, in table order, unlisted ligands last."""
    table = table or hazard_table()
    subjects = _subjects(complexes)
    labels = list(dict.fromkeys(s.label for s in subjects))
    found: dict[str, tuple[Entry, set]] = {}
    for subject in subjects:
        for entry in _entries_for(table, subject):
            found.setdefault(entry.key, (entry, set()))[1].add(subject.label)
    rank = _order(table)
    keys = sorted(found, key=lambda k: (rank.get(k, len(rank)), k))
    cautions = []
    for key in keys:
        entry, applies_to = found[key]
        cautions.append(Caution(title=entry.title, text=entry.text, citation=entry.citation,
                                sources=entry.sources + entry.from_memory,
                                subjects=tuple(sorted(applies_to)) if len(applies_to) < len(labels) else ()))
    return labels, cautions


def _named(labels, limit: int = _LABELS_SHOWN) -> str:
    shown = ", ".join(labels[:limit])
    return shown if len(labels) <= limit else f"{shown} and {len(labels) - limit} more"


def _line(caution: Caution) -> str:
    line = f"{caution.title}: {caution.text}"
    if caution.citation:
        line += f" [{caution.citation}]"
    if caution.subjects:
        line += f" (applies to {_named(list(caution.subjects))})"
    return line


# ---------------------------------------------------------------------------------------------------------
# Public interface


def cautions_for(complexes, table: HazardTable | None = None) -> list[str]:
    """Caution lines for Complex objects or (metal, [ligand names], oxidation state) tuples (the state may be
    left out); de-duplicated, in a stable order, ending with :data:`CLOSING_LINES`."""
    return [_line(c) for c in _applicable(complexes, table)[1]] + list(CLOSING_LINES)


def cautions_text(complexes, table: HazardTable | None = None) -> str:
    """The cautions as a block for stderr: a header naming the compounds, one wrapped item per caution, and the
    closing lines last."""
    labels, cautions = _applicable(complexes, table)
    header = f"Safety ({_named(labels)}):" if labels else "Safety:"
    lines = [header]
    for caution in cautions:
        lines.append(textwrap.fill(_line(caution), _TEXT_WIDTH, initial_indent="  - ", subsequent_indent="    "))
    for closing in CLOSING_LINES:
        lines.append(textwrap.fill(closing, _TEXT_WIDTH, initial_indent="  ", subsequent_indent="  "))
    return "\n".join(lines) + "\n"


def cautions_markdown(complexes, heading: str = "## Safety", table: HazardTable | None = None) -> str:
    """The cautions as a Markdown section for report.md and methods.md: one bullet per caution, the full
    sources, and the closing lines last."""
    labels, cautions = _applicable(complexes, table)
    parts = [heading, ""]
    if labels:
        parts += [f"Cautions for the compounds of this study: {', '.join(labels)}.", ""]
    if cautions:
        for caution in cautions:
            bullet = f"- **{caution.title}.** {caution.text}"
            if caution.citation:
                bullet += f" [{caution.citation}]"
            if caution.subjects:
                bullet += f" (applies to {', '.join(caution.subjects)})"
            parts.append(bullet)
        cited = list(dict.fromkeys(s.full for c in cautions for s in c.sources))
        if cited:
            parts += ["", "Sources: " + "; ".join(cited) + "."]
        parts.append("")
    parts += [COMPUTED_IS_NOT_EXPERIMENT, "", DEFERRAL]
    return "\n".join(parts) + "\n"
