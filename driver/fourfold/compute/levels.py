"""Levels of theory: named presets (frozen dataclasses, defaults in this one place) and custom levels.

Presets
-------
``screen``
    GFN2-xTB (tblite) relaxations and energies. Fast; its spin-state gaps are a screen only.
``quick``
    GFN2-xTB geometries, then B3LYP-D3(BJ)/def2-SVP single points (def2 ECP on 4d/5d metals), density
    fitting, a light integration grid, gas phase. Sized for the demo study (about 4 complexes × 3–4
    spin states within 5 minutes on 2 cores; measured figures in DEVELOPERS.md).
``standard``
    TPSSh-D3(BJ)/def2-SVP relaxations with the def2 ECP, density fitting and C-PCM in acetonitrile,
    then TPSSh-D3(BJ)/def2-TZVP single points on those geometries. The overnight level.

Why TPSSh for ``standard``: hybrid meta-GGAs with about 10 % exact exchange are among the functionals
recommended for 3d spin-state energetics (Jensen, *Inorg. Chem.* 2008, 47, 10357 — from memory; Swart,
*J. Chem. Theory Comput.* 2008, 4, 2057 — from memory), and on the experiment-derived SSE17 set
(Radoń, Drabik, Hodorowicz, Szklarzewicz, *Chem. Sci.* 2024, 15, 20189, doi:10.1039/d4sc05471g)
TPSSh-D3(BJ) has a mean absolute error of 5–7 kcal/mol, like B3LYP*-D3(BJ) and far better than the
B3LYP figure of ~10 kcal/mol on octahedral complexes (Hughes & Friesner, *J. Chem. Theory Comput.*
2011, 7, 19). Only double hybrids and CCSD(T) do clearly better on SSE17, and they are out of reach
for relaxations on a workstation. B3LYP (20 % exact exchange) in ``quick`` leans towards high spin
(more exact exchange favours high spin, docs/sources.md#exact-exchange-spin): a known bias, stated in the report.

PySCF's ``b3lyp`` is the VWN-RPA variant (PySCF ≥ 2.3, as in Gaussian); the D3(BJ) parameters of
the ``dftd3`` package were fitted with the VWN5 variant. The difference is far below the method error.

Grids and thresholds (measured with B3LYP-D3(BJ)/def2-SVP + density fitting on ideal [NiCl4]2-, T-4
triplet and SP-4 singlet, one core): E(T-4) − E(SP-4) moves by 0.07 mEh (0.2 kJ/mol) from PySCF grid
level 3 to level 1, while a cycle costs ~1.6 s on level 1 against ~3.0 s on level 3; so ``quick`` runs on
level 1 throughout. Converging on level 1 and finishing on level 3 (``scf_grid_level``) gives the
level-3 energy to 1e-6 Eh for ~25 % less CPU than level 3 throughout (63 s against 83 s for the T-4
triplet): ``standard`` does that. ``conv_tol`` 1e-6 Eh in ``quick`` is far below the method's error and
cuts the slow tail of the tetrahedral SCFs.

Custom levels
-------------
``custom_level(mapping)`` takes a recipe table: any field of ``Level`` plus ``base`` (a preset to start
from). For optional text fields the string ``"none"`` (and ``"gas"`` for ``solvent``) means None, since
TOML has no null.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass
from functools import cache
from typing import Any

from ..data import load_table
from ..errors import InputError

METHODS = ("xtb", "dft", "hf")
DISPERSIONS = ("d3bj",)
GEOMETRY_SOURCES = ("self", "xtb")
GRID_LEVELS = range(0, 10)  # PySCF's grids.level


@cache
def _solvent_table() -> tuple[dict, dict]:
    table = load_table("solvents")
    return table["solvents"], table["aliases"]


def known_solvents() -> tuple[str, ...]:
    """Names in the solvent table (aliases not included)."""
    return tuple(sorted(_solvent_table()[0]))


def canonical_solvent(name: str) -> str:
    """The table's name for a solvent or one of its aliases; InputError lists the known solvents."""
    solvents, aliases = _solvent_table()
    key = name.strip().lower()
    key = aliases.get(key, key)
    if key not in solvents:
        raise InputError(f"unknown solvent '{name}': use one of {', '.join(known_solvents())} "
                         f"(or aliases {', '.join(sorted(aliases))})")
    return key


def solvent_epsilon(name: str) -> float:
    """Static dielectric constant of a named solvent (data/solvents.toml, with its source there)."""
    return float(_solvent_table()[0][canonical_solvent(name)]["epsilon"])


def solvent_source(name: str) -> str:
    """Key of the source of a solvent's dielectric constant in data/solvents.toml (e.g. ``"mnsol"``)."""
    return str(_solvent_table()[0][canonical_solvent(name)]["source"])


@dataclass(frozen=True)
class Level:
    """One level of theory. Text fields are stored lower case; see the module docstring for presets.

    ``grid_level`` is PySCF's ``grids.level`` for the final energy; ``scf_grid_level`` (None = same) is a
    lighter grid on which the SCF is converged first, then finished on ``grid_level``.
    ``ecp`` is ``"auto"`` (the def2 ECP on every atom with Z > 36 when the basis is a def2 basis), a
    PySCF ECP name, or None (no ECP; refused for Z > 36). ``geometry_from`` is ``"xtb"`` (relax with
    GFN2-xTB, DFT single points) or ``"self"`` (relax at this level). ``single_point_basis`` (None or a
    basis name) asks for single points in a larger basis on the relaxed geometries.
    """

    name: str
    method: str
    functional: str | None = None
    basis: str | None = "def2-svp"
    ecp: str | None = "auto"
    grid_level: int = 3
    scf_grid_level: int | None = None
    solvent: str | None = None
    dispersion: str | None = None
    density_fit: bool = True
    conv_tol: float = 1e-8
    max_cycles: int = 100
    geometry_from: str = "self"
    single_point_basis: str | None = None
    ion_solvent: str | None = None  # the continuum for charged complexes when ``solvent`` is None

    def __post_init__(self):
        for field in dataclasses.fields(self):
            _check_type(field.name, getattr(self, field.name), _FIELD_TYPES[field.name])
        for name in ("name", "method", "functional", "basis", "ecp", "solvent", "dispersion",
                     "geometry_from", "single_point_basis", "ion_solvent"):
            value = getattr(self, name)
            if isinstance(value, str):
                object.__setattr__(self, name, value.strip().lower())
        if self.solvent is not None:
            object.__setattr__(self, "solvent", canonical_solvent(self.solvent))
        if self.ion_solvent is not None:
            object.__setattr__(self, "ion_solvent", canonical_solvent(self.ion_solvent))
        self._check_values()

    def _check_values(self):
        if self.method not in METHODS:
            raise InputError(f"level '{self.name}': method '{self.method}' is not one of {', '.join(METHODS)}")
        if self.method == "dft" and not self.functional:
            raise InputError(f"level '{self.name}': a dft level needs a functional (e.g. functional = \"b3lyp\")")
        if self.method == "hf" and self.functional:
            raise InputError(f"level '{self.name}': an hf level takes no functional")
        if self.method != "xtb" and not self.basis:
            raise InputError(f"level '{self.name}': a {self.method} level needs a basis (e.g. basis = \"def2-svp\")")
        if self.dispersion is not None and self.dispersion not in DISPERSIONS:
            raise InputError(f"level '{self.name}': dispersion '{self.dispersion}' is not one of "
                             f"{', '.join(DISPERSIONS)} or none")
        if self.geometry_from not in GEOMETRY_SOURCES:
            raise InputError(f"level '{self.name}': geometry_from '{self.geometry_from}' is not one of "
                             f"{', '.join(GEOMETRY_SOURCES)}")
        for name in ("grid_level", "scf_grid_level"):
            value = getattr(self, name)
            if value is not None and value not in GRID_LEVELS:
                raise InputError(f"level '{self.name}': {name} must be an integer 0–9, got {value}")
        if not self.conv_tol > 0:
            raise InputError(f"level '{self.name}': conv_tol must be positive, got {self.conv_tol}")
        if self.max_cycles < 1:
            raise InputError(f"level '{self.name}': max_cycles must be at least 1, got {self.max_cycles}")

    def to_dict(self) -> dict[str, Any]:
        """Canonical plain form (every field, normalised values): the level's part of a job key.

        ``custom_level(level.to_dict()) == level``.
        """
        return dataclasses.asdict(self)


# field name -> accepted Python types (None in the tuple: may be None)
_FIELD_TYPES: dict[str, tuple] = {
    "name": (str,),
    "method": (str,),
    "functional": (str, None),
    "basis": (str, None),
    "ecp": (str, None),
    "grid_level": (int,),
    "scf_grid_level": (int, None),
    "solvent": (str, None),
    "dispersion": (str, None),
    "density_fit": (bool,),
    "conv_tol": (float, int),
    "max_cycles": (int,),
    "geometry_from": (str,),
    "single_point_basis": (str, None),
    "ion_solvent": (str, None),
}
_NONE_WORDS = {"none", "null", ""}
_NONE_WORDS_SOLVENT = _NONE_WORDS | {"gas", "vacuum"}


def _check_type(name: str, value: Any, accepted: tuple) -> None:
    if value is None:
        if None in accepted:
            return
        raise InputError(f"level field '{name}' may not be empty")
    types = tuple(t for t in accepted if t is not None)
    # bool is an int in Python; a flag is never a number and a number is never a flag
    wrong_bool = isinstance(value, bool) and bool not in types
    if wrong_bool or not isinstance(value, types):
        wanted = " or ".join(t.__name__ for t in types) + (" or none" if None in accepted else "")
        raise InputError(f"level field '{name}' must be {wanted}, got {value!r}")


PRESETS: dict[str, Level] = {
    "screen": Level(
        name="screen", method="xtb", functional=None, basis=None, ecp=None, density_fit=False,
        geometry_from="self",
    ),
    "quick": Level(
        name="quick", method="dft", functional="b3lyp", basis="def2-svp", ecp="auto",
        grid_level=1, scf_grid_level=None, solvent=None, dispersion="d3bj", density_fit=True,
        conv_tol=1e-6, max_cycles=60, geometry_from="xtb", ion_solvent="acetonitrile",
    ),
    "standard": Level(
        name="standard", method="dft", functional="tpssh", basis="def2-svp", ecp="auto",
        grid_level=3, scf_grid_level=1, solvent="acetonitrile", dispersion="d3bj", density_fit=True,
        conv_tol=1e-8, max_cycles=100, geometry_from="self", single_point_basis="def2-tzvp",
    ),
}

LEVEL_KEYS = tuple(f.name for f in dataclasses.fields(Level))


def level_for_charge(level: Level, charge: int) -> Level:
    """The level a complex of this charge runs at: an ion gets the level's ``ion_solvent`` when the level has
    no solvent of its own. Measured at `quick` on the demo's dianions (benchmarks/ion_solvent.py): in the gas
    phase every HOMO is positive (+1.5 to +3.4 eV: an unbound electron, which def2-SVP without diffuse
    functions hides), C-PCM (acetonitrile) makes them −4.9 to −6.1 eV and moves ΔE(SP-4 − T-4) by 15–20 kJ/mol,
    for 2.4× the CPU of a gas-phase single point; a neutral complex moved by 3 kJ/mol. So `quick` puts ions
    in acetonitrile and leaves neutral complexes in the gas phase (fourfold default)."""
    if charge == 0 or level.solvent is not None or level.ion_solvent is None:
        return level
    return dataclasses.replace(level, solvent=level.ion_solvent)


def get_level(name: str) -> Level:
    """The preset called ``name``; InputError lists the presets for an unknown name."""
    key = str(name).strip().lower()
    if key not in PRESETS:
        raise InputError(f"unknown level '{name}': use one of {', '.join(PRESETS)} or define a custom level")
    return PRESETS[key]


def custom_level(mapping: Mapping[str, Any]) -> Level:
    """A Level from a recipe table: fields of Level plus optional ``base`` (a preset name to start from)."""
    if not isinstance(mapping, Mapping):
        raise InputError(f"a custom level must be a table of settings, got {type(mapping).__name__}")
    valid = ("base",) + LEVEL_KEYS
    unknown = sorted(set(mapping) - set(valid))
    if unknown:
        raise InputError(f"unknown level setting(s) {', '.join(unknown)}: valid keys are {', '.join(valid)}")
    settings = dict(mapping)
    base = settings.pop("base", None)
    if base is not None:
        if not isinstance(base, str):
            raise InputError(f"level setting 'base' must be a preset name, got {base!r}")
        start = get_level(base).to_dict()
    else:
        start = {"name": "custom", "method": "dft"}
    for key, value in settings.items():
        if isinstance(value, str) and _FIELD_TYPES[key][-1] is None:
            none_words = _NONE_WORDS_SOLVENT if key in ("solvent", "ion_solvent") else _NONE_WORDS
            if value.strip().lower() in none_words:
                value = None
        start[key] = value
    if "name" not in settings and base is not None:
        start["name"] = f"{start['name']}-custom"
    return Level(**start)


def exact_exchange_fraction(level: Level) -> float:
    """The share of exact (Hartree–Fock) exchange of a level's method, from libxc through PySCF (1 for HF)."""
    if level.method == "hf":
        return 1.0
    if level.method != "dft":
        raise InputError(f"level '{level.name}' ({level.method}) has no exact-exchange share")
    from pyscf.dft import libxc

    return float(libxc.hybrid_coeff(level.functional))
