"""Recipes: TOML files that say what a study covers, validated before any calculation.

Recipes are data only (read with tomllib): nothing in them is executed or unpickled. Every error names the
file, the key and the fix, so a typo costs seconds, not a night.

```toml
title = "Choosing a nickel(II) precursor"
level = "quick"                      # a preset name, or a [level] table for a custom level
solvent = "dichloromethane"          # optional; omit for the gas phase
arrangements = ["T-4", "SP-4"]       # default: T-4 and SP-4 (with its isomers)
relaxations = ["held", "free"]       # held, free or both (default both)
path_points = 0                      # > 1: held relaxations along the D2d path T-4 → SP-4
frequencies = true                   # free minima get frequencies and the minimum check (default true)
temperature_k = 298.15               # thermochemistry (default 298.15 K and 1 bar, ideal-gas standard state)
pressure_bar = 1.0

[estimate]                           # optional ligand-field overrides for every complex
"Cl.e_sigma" = 4200

[ligands.MeCN]                       # optional custom ligands, usable in formulas by name
xyz = "C 0 0 2.6\nC 0 0 1.14\nN 0 0 0"
donor_index = 2
charge = 0

[ligands.pyim]                       # a chelate: donor_indices names its two donors
xyz = "..."
donor_indices = [0, 7]
charge = 0

[[complex]]
formula = "[NiCl4]2-"
spins = [0, 2]                       # optional: default every allowed 2S
estimate = { "Cl.e_sigma" = 4000 }   # optional per-complex overrides

[[complex]]                          # explicit form
metal = "Ni"
oxidation_state = 2
ligands = ["Cl", "Cl", "PMe3", "PMe3"]

[cluster]                            # optional: batch jobs for `fourfold run --cluster slurm|pbs`
cores = 16                           # cores per batch job (fourfold runs cores // --threads jobs in each)
memory = "32GB"                      # memory per batch job
walltime = "12:00:00"
queue = "chem"                       # optional
account = "proj42"                   # optional
jobs = 4                             # optional: batch jobs to start (default 1)
```
"""

from __future__ import annotations

import math
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path

from ..chem.complex import Complex, complex_explicit, complex_from_formula
from ..chem.ligands import Ligand, custom_ligand
from ..errors import InputError, shown
from ..geometry.polyhedra import ARRANGEMENTS

RELAXATION_KINDS = ("held", "free")
_TOP_KEYS = {"title", "level", "solvent", "arrangements", "relaxations", "path_points", "estimate", "ligands",
             "complex", "run", "cluster", "frequencies", "temperature_k", "pressure_bar"}
DEFAULT_TEMPERATURE_K = 298.15
DEFAULT_PRESSURE_BAR = 1.0
_COMPLEX_KEYS = {"formula", "metal", "oxidation_state", "ligands", "charge", "spins", "arrangements", "estimate", "name"}
_LIGAND_KEYS = {"xyz", "donor_index", "donor_indices", "charge", "f", "pi_ratio", "h", "label", "distance_angstrom"}
_RUN_KEYS = {"workers", "timeout_s", "max_steps", "threads"}
_CLUSTER_REQUIRED = {"cores", "memory", "walltime"}
_CLUSTER_KEYS = _CLUSTER_REQUIRED | {"queue", "account", "jobs"}
# What SLURM and PBS both read: a size with a unit ("32GB", "64 GiB") and [D-]HH:MM[:SS].
_MEMORY = re.compile(r"^\d+(\.\d+)?\s*[kKMGT]i?B$")
_WALLTIME = re.compile(r"^(\d+-)?\d{1,3}:\d{2}(:\d{2})?$")
# Bounds on what a recipe can ask for (fourfold defaults): beyond them the input is a mistake, not a study.
MAX_RECIPE_BYTES = 1_000_000  # a recipe is a few kB; a megabyte of TOML is some other file
_MAX_PATH_POINTS = 100
_MAX_RUN = {"workers": 4096, "threads": 4096, "max_steps": 100_000, "timeout_s": 10**9}
_LIGAND_NUMBERS = ("f", "pi_ratio", "h", "distance_angstrom")


@dataclass(frozen=True)
class ComplexEntry:
    complex: Complex
    spins: tuple[int, ...]
    arrangements: tuple[str, ...]
    estimate_overrides: dict = field(default_factory=dict)


@dataclass(frozen=True)
class Study:
    title: str
    level: object  # fourfold.compute.levels.Level
    arrangements: tuple[str, ...]
    relaxations: tuple[str, ...]
    path_points: int
    complexes: tuple[ComplexEntry, ...]
    run: dict
    source_path: str
    source_text: str
    cluster: dict = field(default_factory=dict)  # [cluster]: batch jobs for --cluster; not part of any job key
    ligand_tables: dict = field(default_factory=dict)  # the validated [ligands.NAME] tables, as written
    frequencies: bool = True  # free minima get a frequency job (minimum check, thermochemistry)
    temperature_k: float = DEFAULT_TEMPERATURE_K  # thermochemistry only: not part of any job key
    pressure_bar: float = DEFAULT_PRESSURE_BAR

    def with_level(self, level) -> Study:
        """The same study at another level (a preset name or a Level)."""
        from dataclasses import replace

        return replace(self, level=_level(self.source_path, level) if isinstance(level, str) else level)


def _fail(path: str, where: str, message: str) -> InputError:
    return InputError(f"{path}: {where}: {message}")


def _expect(path, where, value, kind, what):
    if not isinstance(value, kind) or (kind is int and isinstance(value, bool)):
        raise _fail(path, where, f"must be {what}, got {shown(value)}")
    return value


def _text(path, where, value, longest: int = 200) -> str:
    """A name or title: a string of printable characters on one line (it is echoed in tables and headings)."""
    _expect(path, where, value, str, "a string")
    if not value.isprintable() or len(value) > longest:
        raise _fail(path, where, f"must be one line of at most {longest} printable characters, got {shown(value)}")
    return value


def _unknown_keys(path, where, table: dict, allowed: set):
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise _fail(path, where, f"unknown key{'s' if len(unknown) > 1 else ''} {', '.join(map(shown, unknown[:5]))}; "
                                 f"valid keys are {', '.join(sorted(allowed))}")


def _arrangement_list(path, where, value) -> tuple[str, ...]:
    _expect(path, where, value, list, "a list of arrangements such as [\"T-4\", \"SP-4\"]")
    for item in value:
        if item not in ARRANGEMENTS:
            raise _fail(path, where, f"unknown arrangement {shown(item)}; use {', '.join(ARRANGEMENTS)}")
    if not value:
        raise _fail(path, where, "is empty; list at least one arrangement")
    return tuple(dict.fromkeys(value))


def _overrides(path, where, value) -> dict:
    _expect(path, where, value, dict, "a table of KEY = number, e.g. \"Cl.e_sigma\" = 4000")
    for key, number in value.items():
        if not isinstance(number, (int, float)) or isinstance(number, bool):
            raise _fail(path, f"{where}.{key}", f"must be a number, got {shown(number)}")
        if not math.isfinite(number):
            raise _fail(path, f"{where}.{key}", f"must be a finite number, got {shown(number)}")
    return {k: float(v) for k, v in value.items()}


def _ligands(path, table) -> dict[str, Ligand]:
    _expect(path, "ligands", table, dict, "a table of [ligands.NAME] tables")
    found = {}
    for name, spec in table.items():
        where = f"ligands.{name}"
        _expect(path, where, spec, dict, "a table with xyz, donor_index (or a chelate's donor_indices) and charge")
        _unknown_keys(path, where, spec, _LIGAND_KEYS)
        if "donor_index" in spec and "donor_indices" in spec:
            raise _fail(path, where, "give donor_index (one donor) or donor_indices (a chelate's two), not both")
        donors_key = "donor_indices" if "donor_indices" in spec else "donor_index"
        for key in ("xyz", donors_key, "charge"):
            if key not in spec:
                raise _fail(path, where, f"missing '{key}' (a custom ligand needs xyz, donor_index — or donor_indices "
                                         "for a chelate — and charge)")
        _expect(path, f"{where}.xyz", spec["xyz"], str, "an XYZ block as a string ('Symbol x y z' lines, Å)")
        if donors_key == "donor_index":
            _expect(path, f"{where}.donor_index", spec["donor_index"], int, "an integer (0-based atom index)")
        elif not (isinstance(spec["donor_indices"], list) and len(spec["donor_indices"]) == 2
                  and all(type(i) is int for i in spec["donor_indices"])):
            raise _fail(path, f"{where}.donor_indices", f"must be two 0-based atom indices such as [0, 7], "
                                                        f"got {spec['donor_indices']!r}")
        _expect(path, f"{where}.charge", spec["charge"], int, "an integer")
        for key in _LIGAND_NUMBERS:
            if key in spec:
                _expect(path, f"{where}.{key}", spec[key], (int, float), "a number")
        if "label" in spec:
            _text(path, f"{where}.label", spec["label"], longest=80)
        extra = {k: v for k, v in spec.items() if k not in ("xyz", donors_key, "charge")}
        try:
            found[name] = custom_ligand(name, spec["xyz"], spec[donors_key], spec["charge"], **extra)
        except InputError as error:
            raise _fail(path, where, str(error)) from None
    return found


def _complex_entry(path, index, spec, ligands, default_arrangements, global_overrides) -> ComplexEntry:
    where = f"complex[{index}]"
    _expect(path, where, spec, dict, "a [[complex]] table")
    _unknown_keys(path, where, spec, _COMPLEX_KEYS)
    if "name" in spec:
        _text(path, f"{where}.name", spec["name"], longest=80)
    try:
        if "formula" in spec:
            if "metal" in spec or "ligands" in spec:
                raise InputError("give either formula or metal/oxidation_state/ligands, not both")
            _expect(path, f"{where}.formula", spec["formula"], str, "a formula string such as \"[NiCl4]2-\"")
            cx = complex_from_formula(spec["formula"], ligands)
        elif "metal" in spec:
            for key in ("oxidation_state", "ligands"):
                if key not in spec:
                    raise InputError(f"the explicit form needs metal, oxidation_state and ligands; '{key}' is missing")
            _expect(path, f"{where}.oxidation_state", spec["oxidation_state"], int, "an integer")
            _expect(path, f"{where}.metal", spec["metal"], str, "an element symbol such as \"Ni\"")
            _expect(path, f"{where}.ligands", spec["ligands"], list, "a list of four ligand names")
            for number, name in enumerate(spec["ligands"]):
                _expect(path, f"{where}.ligands[{number}]", name, str, "a ligand name such as \"Cl\"")
            charge = spec.get("charge")
            if charge is not None:
                _expect(path, f"{where}.charge", charge, int, "an integer")
            cx = complex_explicit(spec["metal"], spec["oxidation_state"], spec["ligands"], charge=charge,
                                  custom_ligands=ligands)
        else:
            raise InputError("needs a formula (e.g. formula = \"[NiCl4]2-\") or metal/oxidation_state/ligands")
        spins = cx.allowed_spin2s
        if "spins" in spec:
            _expect(path, f"{where}.spins", spec["spins"], list, "a list of 2S values, e.g. [0, 2]")
            spins = tuple(cx.check_spin(_expect(path, f"{where}.spins", s, int, "an integer 2S")) for s in spec["spins"])
    except InputError as error:
        raise _fail(path, where, str(error)) from None
    arrangements = (_arrangement_list(path, f"{where}.arrangements", spec["arrangements"])
                    if "arrangements" in spec else default_arrangements)
    overrides = dict(global_overrides)
    if "estimate" in spec:
        overrides.update(_overrides(path, f"{where}.estimate", spec["estimate"]))
    try:
        from ..field.estimate import parameters_for

        parameters_for(cx, overrides)
    except InputError as error:
        raise _fail(path, f"{where}.estimate", str(error)) from None
    return ComplexEntry(cx, spins, arrangements, overrides)


def _level(path, value):
    from ..compute.levels import custom_level, get_level

    try:
        if isinstance(value, str):
            return get_level(value)
        if isinstance(value, dict):
            return custom_level(value)
    except InputError as error:
        raise _fail(path, "level", str(error)) from None
    raise _fail(path, "level", f"must be a preset name (screen, quick, standard) or a [level] table, "
                               f"got {shown(value)}")


def cluster_settings(path, table) -> dict:
    """A validated [cluster] table (batch-job size for dask-jobqueue), with jobs defaulting to 1."""
    _expect(path, "cluster", table, dict, "a [cluster] table with cores, memory and walltime")
    _unknown_keys(path, "cluster", table, _CLUSTER_KEYS)
    missing = sorted(_CLUSTER_REQUIRED - set(table))
    if missing:
        raise _fail(path, "cluster", f"missing '{missing[0]}' (a [cluster] table needs cores, memory and walltime, "
                                     "e.g. cores = 16, memory = \"32GB\", walltime = \"12:00:00\")")
    for key in ("cores", "jobs"):
        if key in table and _expect(path, f"cluster.{key}", table[key], int, "a positive integer") <= 0:
            raise _fail(path, f"cluster.{key}", f"must be positive, got {table[key]}")
    for key in ("memory", "walltime", "queue", "account"):
        if key in table:
            _expect(path, f"cluster.{key}", table[key], str, "a string")
    if not _MEMORY.match(table["memory"]):
        raise _fail(path, "cluster.memory", f"must be a size with a unit such as \"32GB\" or \"64GiB\", got "
                                            f"{shown(table['memory'])}")
    if not _WALLTIME.match(table["walltime"]):
        raise _fail(path, "cluster.walltime", f"must be HH:MM:SS (or D-HH:MM:SS), got {shown(table['walltime'])}")
    return {"jobs": 1, **table}


def parse_recipe(text: str, path: str = "<recipe>") -> Study:
    """Validate a recipe's text and return the Study it describes."""
    if len(text) > MAX_RECIPE_BYTES:
        raise InputError(f"{path}: {len(text) / 1e6:.1f} MB is no recipe (a recipe is a few kB of TOML): give the "
                         "recipe's .toml file")
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise InputError(f"{path}: not valid TOML ({error}); check quotes, brackets and '=' signs") from None
    _unknown_keys(path, "top level", data, _TOP_KEYS)
    title = _text(path, "title", data.get("title", Path(path).stem))
    arrangements = _arrangement_list(path, "arrangements", data.get("arrangements", ["T-4", "SP-4"]))
    relaxations = data.get("relaxations", list(RELAXATION_KINDS))
    _expect(path, "relaxations", relaxations, list, "a list: [\"held\"], [\"free\"] or [\"held\", \"free\"]")
    if not relaxations or any(r not in RELAXATION_KINDS for r in relaxations):
        raise _fail(path, "relaxations", f"use held, free or both, got {shown(relaxations)}")
    path_points = _expect(path, "path_points", data.get("path_points", 0), int, "an integer (0 for no path)")
    if path_points < 0 or path_points == 1 or path_points > _MAX_PATH_POINTS:
        raise _fail(path, "path_points", f"must be 0 (no path) or at least 2 (at most {_MAX_PATH_POINTS}), got "
                                         f"{path_points}")
    level = _level(path, data.get("level", "quick"))
    if "solvent" in data:
        solvent = data["solvent"]
        _expect(path, "solvent", solvent, str, "a solvent name, or leave it out for the gas phase")
        try:
            from dataclasses import replace

            gas = solvent.strip().lower() in ("gas", "none")
            # "gas" means gas phase for every complex: ions too, whatever continuum the level gives them
            level = replace(level, solvent=None, ion_solvent=None) if gas else replace(level, solvent=solvent)
        except InputError as error:
            raise _fail(path, "solvent", str(error)) from None
    global_overrides = _overrides(path, "estimate", data.get("estimate", {}))
    ligands = _ligands(path, data.get("ligands", {}))
    specs = data.get("complex")
    if specs is None:
        raise _fail(path, "complex", "no [[complex]] entries: add at least one, e.g. [[complex]] formula = \"[NiCl4]2-\"")
    _expect(path, "complex", specs, list, "an array of tables written as [[complex]]")
    entries, seen = [], {}
    for index, spec in enumerate(specs):
        entry = _complex_entry(path, index, spec, ligands, arrangements, global_overrides)
        formula = entry.complex.formula
        if formula in seen:
            raise _fail(path, f"complex[{index}]", f"{formula} is already complex[{seen[formula]}]; remove the duplicate")
        seen[formula] = index
        entries.append(entry)
    run = data.get("run", {})
    _expect(path, "run", run, dict, "a [run] table")
    _unknown_keys(path, "run", run, _RUN_KEYS)
    for key, value in run.items():
        _expect(path, f"run.{key}", value, (int, float) if key == "timeout_s" else int, "a positive number")
        if not 0 < value <= _MAX_RUN[key]:  # false for NaN too
            raise _fail(path, f"run.{key}", f"must be positive and at most {_MAX_RUN[key]}, got {shown(value)}")
    cluster = cluster_settings(path, data["cluster"]) if "cluster" in data else {}
    frequencies = _expect(path, "frequencies", data.get("frequencies", True), bool, "true or false")
    thermo = {}
    for key, default in (("temperature_k", DEFAULT_TEMPERATURE_K), ("pressure_bar", DEFAULT_PRESSURE_BAR)):
        value = _expect(path, key, data.get(key, default), (int, float), "a number")
        if isinstance(value, bool) or not value > 0:
            raise _fail(path, key, f"must be a positive number, got {value!r}")
        thermo[key] = float(value)
    return Study(title, level, arrangements, tuple(dict.fromkeys(relaxations)), path_points, tuple(entries), run,
                 path, text, cluster, dict(data.get("ligands", {})), frequencies, **thermo)


def load_recipe(path) -> Study:
    """Read and validate a recipe file."""
    path = Path(path)
    return parse_recipe(read_toml_text(path, "recipe"), str(path))


def read_toml_text(path: Path, what: str) -> str:
    """The text of a TOML input file, refused in one line when missing, unreadable, too big or not UTF-8."""
    try:
        if path.stat().st_size > MAX_RECIPE_BYTES:
            raise InputError(f"{what} {path} is {path.stat().st_size / 1e6:.1f} MB: a {what} is a few kB of TOML; "
                             "is this the right file?")
        return path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise InputError(f"{what} {path} not found: give the path of a .toml {what} (e.g. recipes/demo.toml)") from None
    except UnicodeDecodeError:
        raise InputError(f"{what} {path} is not UTF-8 text: save it as UTF-8") from None
    except OSError as error:
        raise InputError(f"{what} {path}: cannot read it ({error.strerror}); give a readable .toml file") from None


def scan_recipe_text(formula: str, level: str, relaxations=RELAXATION_KINDS, arrangements=("T-4", "SP-4"),
                     spins=None) -> str:
    """The recipe of a one-complex study: every arrangement × isomer × 2S at one level."""
    import json

    lines = [f"title = {json.dumps('Scan of ' + formula)}", f"level = {json.dumps(level)}",
             f"arrangements = {json.dumps(list(arrangements))}", f"relaxations = {json.dumps(list(relaxations))}",
             "", "[[complex]]", f"formula = {json.dumps(formula)}"]
    if spins:
        lines.append(f"spins = {json.dumps(list(spins))}")
    return "\n".join(lines) + "\n"


def recipe_for_formula(formula: str, level: str) -> Study:
    """A one-complex study (default arrangements, spins and relaxations) for `fourfold run --formula`."""
    complex_from_formula(formula)  # a mistake in the formula gets its own error, not one about a recipe
    try:
        return parse_recipe(scan_recipe_text(formula, level), "--formula")
    except InputError as error:
        raise InputError(str(error).replace("--formula: level: ", "--level: ")) from None


def _toml_level(level) -> dict:
    # TOML has no null: custom_level reads "none" as None, so the table parses back to the same Level
    return {k: ("none" if v is None else v) for k, v in level.to_dict().items()}


def study_to_toml(study: Study) -> str:
    """The study as a recipe: what it ran, with the level written out in full (not a preset's name, whose
    settings may change between versions). Parsing the text gives a study with the same jobs."""
    import tomli_w

    data = {"title": study.title, "arrangements": list(study.arrangements), "relaxations": list(study.relaxations),
            "path_points": study.path_points, "frequencies": study.frequencies, "temperature_k": study.temperature_k,
            "pressure_bar": study.pressure_bar, "level": _toml_level(study.level)}
    if study.run:
        data["run"] = dict(study.run)
    if study.cluster:
        data["cluster"] = dict(study.cluster)
    if study.ligand_tables:
        data["ligands"] = study.ligand_tables
    complexes = []
    for entry in study.complexes:
        spec = {"formula": entry.complex.formula, "spins": list(entry.spins)}
        if entry.arrangements != study.arrangements:
            spec["arrangements"] = list(entry.arrangements)
        if entry.estimate_overrides:
            spec["estimate"] = dict(entry.estimate_overrides)
        complexes.append(spec)
    data["complex"] = complexes
    header = "# Written by fourfold from the study that ran (levels in full); `fourfold run` reads it back.\n"
    return header + tomli_w.dumps(data)


def load_folder_study(folder) -> Study:
    """The study a study folder was run with (the recipe.toml the run wrote there)."""
    recipe = Path(folder) / "recipe.toml"
    if not recipe.exists():
        raise InputError(f"{folder} is not a fourfold study folder (no recipe.toml): give the --out folder of a run")
    return load_recipe(recipe)
