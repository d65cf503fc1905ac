"""Monodentate ligands: charge, donor atom, internal geometry and ligand-field parameters.

The bundled set lives in ``data/ligands.toml``; a recipe can add ligands of its own with
:func:`custom_ligand` (an XYZ fragment, the donor index and the charge).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field, replace
from functools import cache

import numpy as np

from ..data import load_table
from ..errors import InputError, shown
from .metals import Sourced

# Ligand-field defaults for a custom ligand whose recipe gives none: the middle of the spectrochemical
# series (water-like) [common practice, no source]; the estimate labels them.
_CUSTOM_DEFAULTS = {"f": 1.0, "pi_ratio": 0.0, "h": 1.5, "repulsion_cm": None}
# What a custom ligand may be (fourfold defaults). A name is written in formulas and file names: letters,
# digits and '_'. Atoms closer than 0.5 Å are one atom typed twice: the shortest bond, H–H, is 0.74 Å
# (common practice, no source). A ligand of more than 200 atoms is no ligand fourfold can compute in time.
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_]{0,23}$")
_CLOSEST_ANGSTROM = 0.5
_MOST_ATOMS = 200
_DISTANCE_RANGE_ANGSTROM = (1.0, 4.0)  # M–L start distances: 1.7–2.7 Å in practice (common practice, no source)


@dataclass(frozen=True)
class Ligand:
    """One monodentate ligand. ``positions_angstrom`` is in the local frame (donor at origin, M–L along +z
    pointing away from the metal); ``symbols[0]`` is the donor."""

    name: str
    label: str
    charge: int
    symbols: tuple[str, ...]
    positions_angstrom: np.ndarray = field(compare=False, repr=False)
    f: Sourced
    pi_ratio: Sourced
    h: Sourced
    repulsion_cm: Sourced
    aliases: tuple[str, ...] = ()
    distance_angstrom: float | None = None  # M–L start distance override

    @property
    def donor(self) -> str:
        return self.symbols[0]

    @property
    def pi_acceptor(self) -> bool:
        return self.pi_ratio.value < 0


def covalent_radius_angstrom(symbol: str) -> float:
    """Pyykkö–Atsumi single-bond radius of a ligand atom or a metal."""
    radii = load_table("ligands")["radii_pm"]
    if symbol in radii:
        return radii[symbol] / 100.0
    from .metals import all_metals

    metals = all_metals()
    if symbol in metals:
        return metals[symbol].radius_angstrom
    raise InputError(f"no covalent radius for element '{symbol}': fourfold knows {', '.join(radii)}")


def _sourced(entry, sources) -> Sourced:
    value, key = entry
    return Sourced(float(value), sources[key])


@cache
def _bundled() -> dict[str, Ligand]:
    table = load_table("ligands")
    sources = table["sources"]
    ligands = {}
    for name, row in table.items():
        if name in ("sources", "radii_pm"):
            continue
        symbols = tuple(atom[0] for atom in row["atoms"])
        positions = np.array([atom[1:] for atom in row["atoms"]], dtype=float)
        ligands[name] = Ligand(
            name=name,
            label=row["label"],
            charge=row["charge"],
            symbols=symbols,
            positions_angstrom=positions,
            f=_sourced(row["f"], sources),
            pi_ratio=_sourced(row["pi_ratio"], sources),
            h=_sourced(row["h"], sources),
            repulsion_cm=_sourced(row["repulsion_cm"], sources),
            aliases=tuple(row["aliases"]),
        )
    return ligands


def bundled_ligands() -> dict[str, Ligand]:
    return dict(_bundled())


def ligand_lookup(extra: dict[str, Ligand] | None = None) -> dict[str, Ligand]:
    """Every name or alias a formula may use -> ligand (custom ligands win over bundled ones)."""
    lookup = {}
    for ligand in [*_bundled().values(), *(extra or {}).values()]:
        for alias in (ligand.name, *ligand.aliases):
            lookup[alias] = ligand
    return lookup


def get_ligand(name: str, extra: dict[str, Ligand] | None = None) -> Ligand:
    lookup = ligand_lookup(extra)
    if name in lookup:
        return lookup[name]
    known = ", ".join(sorted({lig.name for lig in lookup.values()}))
    raise InputError(f"unknown ligand '{name}': known ligands are {known}; define others in a recipe's [ligands] table")


def custom_ligand(name: str, xyz: str, donor_index: int, charge: int, **parameters) -> Ligand:
    """A ligand from an XYZ fragment (lines 'Symbol x y z' in Å, optional count/comment header).

    The fragment is moved so the donor sits at the origin and turned so that its centroid lies on +z
    (away from the metal). ``parameters`` may set f, pi_ratio, h, repulsion_cm, label, distance_angstrom.
    """
    if not isinstance(name, str) or not _NAME.match(name):
        raise InputError(f"ligand name {shown(name)}: use letters, digits and '_' (up to 24, a letter first), e.g. "
                         "MeCN; the name is written in formulas")
    symbols, positions = _parse_xyz(name, xyz)
    _check_atoms(name, positions)
    if not 0 <= donor_index < len(symbols):
        raise InputError(f"ligand '{name}': donor_index {donor_index} is outside the fragment's {len(symbols)} atoms (0-based)")
    for symbol in symbols:
        covalent_radius_angstrom(symbol)
    order = [donor_index] + [i for i in range(len(symbols)) if i != donor_index]
    symbols = tuple(symbols[i] for i in order)
    positions = positions[order] - positions[donor_index]
    positions = positions @ _rotation_to_z(positions).T
    unknown = set(parameters) - {"f", "pi_ratio", "h", "repulsion_cm", "label", "distance_angstrom"}
    if unknown:
        raise InputError(f"ligand '{name}': unknown keys {sorted(unknown)}; use f, pi_ratio, h, repulsion_cm, label, distance_angstrom")
    for key in ("f", "pi_ratio", "h", "repulsion_cm", "distance_angstrom"):
        value = parameters.get(key, 0.0)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise InputError(f"ligand '{name}': {key} must be a finite number, got {shown(value)}")
    distance = parameters.get("distance_angstrom")
    if distance is not None and not _DISTANCE_RANGE_ANGSTROM[0] <= distance <= _DISTANCE_RANGE_ANGSTROM[1]:
        low, high = _DISTANCE_RANGE_ANGSTROM
        raise InputError(f"ligand '{name}': distance_angstrom {distance} is no metal–donor distance: "
                         f"give {low}–{high} Å")
    label = parameters.get("label", name)
    if not isinstance(label, str) or not label.isprintable():
        raise InputError(f"ligand '{name}': label must be one line of printable text, got {shown(label)}")
    values = {}
    for key, default in _CUSTOM_DEFAULTS.items():
        if key in parameters:
            values[key] = Sourced(float(parameters[key]), "recipe")
        elif default is None:
            values[key] = _bundled()["NH3"].repulsion_cm if key == "repulsion_cm" else None
        else:
            values[key] = Sourced(default, "fourfold default for custom ligands: mid-series (water-like)")
    return Ligand(
        name=name,
        label=label,
        charge=int(charge),
        symbols=symbols,
        positions_angstrom=positions,
        aliases=(),
        distance_angstrom=parameters.get("distance_angstrom"),
        **values,
    )


def with_parameters(ligand: Ligand, **values: float) -> Ligand:
    """Copy of a ligand with some ligand-field parameters overridden (source: 'override')."""
    allowed = {"f", "pi_ratio", "h", "repulsion_cm"}
    unknown = set(values) - allowed
    if unknown:
        raise InputError(f"cannot set {sorted(unknown)} on ligand {ligand.name}: settable are {sorted(allowed)}")
    return replace(ligand, **{k: Sourced(float(v), "override") for k, v in values.items()})


def _parse_xyz(name: str, xyz: str) -> tuple[list[str], np.ndarray]:
    lines = [line.split() for line in xyz.strip().splitlines() if line.strip()]
    if lines and len(lines[0]) == 1 and lines[0][0].isdigit():
        lines = lines[2:] if len(lines) > 1 and len(lines[1]) != 4 else lines[1:]
    symbols, rows = [], []
    for number, parts in enumerate(lines, 1):
        try:
            if len(parts) != 4:
                raise ValueError
            rows.append([float(x) for x in parts[1:]])
            symbols.append(parts[0])
        except ValueError:
            raise InputError(f"ligand '{name}': XYZ line {number} must be 'Symbol x y z' (Å), got '{' '.join(parts)}'") from None
    if not symbols:
        raise InputError(f"ligand '{name}': the XYZ fragment has no atoms")
    return symbols, np.array(rows)


def _check_atoms(name: str, positions: np.ndarray) -> None:
    if len(positions) > _MOST_ATOMS:
        raise InputError(f"ligand '{name}': {len(positions)} atoms; a custom ligand has at most {_MOST_ATOMS}")
    if not np.isfinite(positions).all():
        raise InputError(f"ligand '{name}': a coordinate is not a finite number (nan or inf); give Å as numbers")
    gaps = np.linalg.norm(positions[:, None, :] - positions[None, :, :], axis=-1)
    gaps[np.diag_indices(len(positions))] = np.inf
    first, second = np.unravel_index(np.argmin(gaps), gaps.shape)
    if gaps[first, second] < _CLOSEST_ANGSTROM:
        raise InputError(f"ligand '{name}': atoms {min(first, second)} and {max(first, second)} are "
                         f"{gaps[first, second]:.2f} Å apart (closer than {_CLOSEST_ANGSTROM} Å): an atom typed twice?")


def _rotation_to_z(positions: np.ndarray) -> np.ndarray:
    """Rotation taking the fragment's centroid direction (seen from the donor) onto +z."""
    centroid = positions.mean(axis=0)
    norm = np.linalg.norm(centroid)
    if norm < 1e-8:  # a single atom or a symmetric fragment around the donor
        return np.eye(3)
    a = centroid / norm
    b = np.array([0.0, 0.0, 1.0])
    v = np.cross(a, b)
    c = float(a @ b)
    if np.linalg.norm(v) < 1e-12:
        return np.eye(3) if c > 0 else np.diag([1.0, -1.0, -1.0])
    vx = np.array([[0, -v[2], v[1]], [v[2], 0, -v[0]], [-v[1], v[0], 0]])
    return np.eye(3) + vx + vx @ vx / (1 + c)
