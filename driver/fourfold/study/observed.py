"""Observed four-coordinate complexes (``data/observed.toml``): the set fourfold's verdicts are validated on.

Each entry is a measured structure and spin with its published source; :func:`load_observed` checks the file
and returns frozen :class:`ObservedComplex` records, :func:`available` keeps those whose ligands fourfold knows.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache

from ..chem.ligands import ligand_lookup
from ..chem.metals import get_metal
from ..data import load_table
from ..errors import InputError
from ..geometry.polyhedra import ARRANGEMENTS

OBSERVED_ARRANGEMENTS = ("T-4", "SP-4")
PHASES = ("crystal", "gas", "solution")
CHECK_TAGS = ("checked", "from memory")
_REQUIRED = {"name", "formula", "metal", "oxidation_state", "d_electrons", "charge", "arrangement_observed",
             "spin2s_observed", "phase", "compound", "sources", "used_in_calibration"}
_OPTIONAL = {"isomer", "tau4_observed", "ml_distance_angstrom", "distance_source", "distance_missing",
             "needs_ligands", "note"}
_SOURCE_KEYS = {"cite", "check", "seen"}


@dataclass(frozen=True)
class Source:
    key: str
    cite: str
    check: str  # "checked" or "from memory"
    seen: str = ""


@dataclass(frozen=True)
class ObservedComplex:
    name: str
    formula: str
    metal: str
    oxidation_state: int
    d_electrons: int
    charge: int
    arrangement: str
    isomer: str
    spin2s: int
    tau4: float | None
    phase: str
    compound: str
    distances_angstrom: tuple[tuple[str, float], ...]  # (ligand as written in the formula, M–L distance)
    distance_source: Source | None
    distance_missing: str
    sources: tuple[Source, ...]
    used_in_calibration: bool
    needs_ligands: tuple[str, ...]
    note: str

    @property
    def row(self) -> str:
        return get_metal(self.metal).row


def load_observed(table: dict | None = None) -> tuple[ObservedComplex, ...]:
    """Every entry of ``table`` (default: the bundled data/observed.toml), checked; InputError names the entry
    and the key to fix."""
    table = load_table("observed") if table is None else table
    sources = _sources(table.get("sources", {}))
    entries = table.get("complex", [])
    if not entries:
        raise InputError("observed set: no [[complex]] entries")
    result = tuple(_entry(i, raw, sources) for i, raw in enumerate(entries))
    names = [e.name for e in result]
    duplicate = next((n for n in names if names.count(n) > 1), None)
    if duplicate:
        raise InputError(f"observed set: name {duplicate!r} appears twice; names must be unique")
    return result


@cache
def bundled_observed() -> tuple[ObservedComplex, ...]:
    return load_observed()


def available(entries=None) -> tuple[ObservedComplex, ...]:
    """The entries whose ``needs_ligands`` all exist in fourfold's ligand library."""
    known = ligand_lookup()
    entries = bundled_observed() if entries is None else entries
    return tuple(e for e in entries if all(name in known for name in e.needs_ligands))


def _sources(raw: dict) -> dict[str, Source]:
    sources = {}
    for key, value in raw.items():
        where = f"observed set: source {key!r}"
        if not isinstance(value, dict) or not {"cite", "check"} <= set(value):
            raise InputError(f"{where} needs a table with cite and check")
        if set(value) - _SOURCE_KEYS:
            raise InputError(f"{where}: unknown keys {sorted(set(value) - _SOURCE_KEYS)}; use {sorted(_SOURCE_KEYS)}")
        if value["check"] not in CHECK_TAGS:
            raise InputError(f"{where}: check must be one of {', '.join(CHECK_TAGS)}, not {value['check']!r}")
        sources[key] = Source(key, str(value["cite"]), value["check"], str(value.get("seen", "")))
    return sources


def _entry(index: int, raw: dict, sources: dict[str, Source]) -> ObservedComplex:
    where = f"observed set, entry {index + 1} ({raw.get('name', 'no name')})"
    missing = _REQUIRED - set(raw)
    if missing:
        raise InputError(f"{where}: missing {', '.join(sorted(missing))}")
    unknown = set(raw) - _REQUIRED - _OPTIONAL
    if unknown:
        raise InputError(f"{where}: unknown keys {', '.join(sorted(unknown))}")

    def integer(key: str) -> int:
        value = raw[key]
        if not isinstance(value, int) or isinstance(value, bool):
            raise InputError(f"{where}: {key} must be an integer, not {value!r}")
        return value

    def source(key: str) -> Source:
        if key not in sources:
            raise InputError(f"{where}: source {key!r} is not in [sources]; add it there or fix the key")
        return sources[key]

    metal = get_metal(str(raw["metal"]))
    oxidation_state, d_electrons = integer("oxidation_state"), integer("d_electrons")
    spin2s = integer("spin2s_observed")
    if metal.d_electrons(oxidation_state) != d_electrons:
        raise InputError(f"{where}: d_electrons {d_electrons} but {metal.symbol}({oxidation_state:+d}) is "
                         f"d{metal.d_electrons(oxidation_state)}")
    top = min(d_electrons, 10 - d_electrons)
    if not (0 <= spin2s <= top and (spin2s - top) % 2 == 0):
        raise InputError(f"{where}: spin2s_observed {spin2s} is impossible for d{d_electrons}")
    arrangement = raw["arrangement_observed"]
    if arrangement not in OBSERVED_ARRANGEMENTS:
        raise InputError(f"{where}: arrangement_observed must be one of {', '.join(OBSERVED_ARRANGEMENTS)} "
                         f"(of fourfold's {', '.join(ARRANGEMENTS)}), not {arrangement!r}")
    if raw["phase"] not in PHASES:
        raise InputError(f"{where}: phase must be one of {', '.join(PHASES)}, not {raw['phase']!r}")
    tau4 = raw.get("tau4_observed")
    if tau4 is not None and not (isinstance(tau4, (int, float)) and 0.0 <= tau4 <= 1.0):
        raise InputError(f"{where}: tau4_observed must be a number from 0 to 1, not {tau4!r}")
    if not isinstance(raw["used_in_calibration"], bool):
        raise InputError(f"{where}: used_in_calibration must be true or false")
    if not raw["sources"]:
        raise InputError(f"{where}: sources is empty; every entry needs a published source")
    distances = raw.get("ml_distance_angstrom", {})
    if bool(distances) == bool(raw.get("distance_missing")) or bool(distances) != ("distance_source" in raw):
        raise InputError(f"{where}: give ml_distance_angstrom with distance_source, or distance_missing with "
                         "the reason, not both")
    for ligand, value in distances.items():
        if not isinstance(value, (int, float)) or not 1.0 < value < 3.5:
            raise InputError(f"{where}: M–{ligand} distance {value!r} Å is not a bond length (1–3.5 Å)")
    return ObservedComplex(
        name=str(raw["name"]), formula=str(raw["formula"]), metal=metal.symbol, oxidation_state=oxidation_state,
        d_electrons=d_electrons, charge=integer("charge"), arrangement=arrangement,
        isomer=str(raw.get("isomer", "")), spin2s=spin2s, tau4=None if tau4 is None else float(tau4),
        phase=raw["phase"], compound=str(raw["compound"]),
        distances_angstrom=tuple((k, float(v)) for k, v in distances.items()),
        distance_source=source(raw["distance_source"]) if distances else None,
        distance_missing=str(raw.get("distance_missing", "")),
        sources=tuple(source(k) for k in raw["sources"]), used_in_calibration=raw["used_in_calibration"],
        needs_ligands=tuple(raw.get("needs_ligands", ())), note=str(raw.get("note", "")),
    )
