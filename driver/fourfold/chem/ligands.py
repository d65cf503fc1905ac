"""Ligands: charge, donor atom(s), a built 3D fragment and ligand-field parameters.

The bundled set lives in ``data/ligands.toml``; a recipe can add ligands of its own with
:func:`custom_ligand` (an XYZ fragment, the donor index or the two donor indices of a chelate, the charge).

Fragment frames (``positions_angstrom``; the first ``denticity`` atoms are the donors):

* monodentate: the donor at the origin, the metal on the −z side (the M–L bond points along +z);
* chelate (two donors): the donors on the y axis at ±d/2 (``symbols[0]`` on +y), the metal on the −x
  axis and the backbone towards +x. The metal's distance is not stored: the builder puts the donors at the
  complex's M–L distance r, so the bite angle is 2·asin(d / 2r), the fragment's own.
"""

from __future__ import annotations

import difflib
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
_CUSTOM_DEFAULTS = {"f": 1.0, "pi_ratio": 0.0, "h": 1.5}
CUSTOM_SOURCE = "fourfold default for custom ligands: mid-series (water-like)"
_PARAMETER_KEYS = ("f", "pi_ratio", "h")
_CUSTOM_KEYS = {*_PARAMETER_KEYS, "label", "distance_angstrom"}
MAX_DENTICITY = 2
# What a custom ligand may be (fourfold defaults). A name is written in formulas and file names: letters,
# digits and '_'. Atoms closer than 0.5 Å are one atom typed twice: the shortest bond, H–H, is 0.74 Å
# (common practice, no source). A ligand of more than 200 atoms is no ligand fourfold can compute in time.
_NAME = re.compile(r"^[A-Za-z][A-Za-z0-9_]{0,23}$")
_CLOSEST_ANGSTROM = 0.5
_MOST_ATOMS = 200
_DISTANCE_RANGE_ANGSTROM = (1.0, 4.0)  # M–L start distances: 1.7–2.7 Å in practice (common practice, no source)


@dataclass(frozen=True)
class Ligand:
    """One ligand: monodentate or a two-donor chelate, its fragment in the frame of the module docstring."""

    name: str
    label: str
    charge: int
    symbols: tuple[str, ...]
    positions_angstrom: np.ndarray = field(compare=False, repr=False)
    f: Sourced
    pi_ratio: Sourced
    h: Sourced
    aliases: tuple[str, ...] = ()
    distance_angstrom: float | None = None  # M–L start distance override
    denticity: int = 1
    published_cone_deg: Sourced | None = None  # Tolman's cone angle where one is published
    geometry_source: str = "recipe fragment"

    @property
    def donor(self) -> str:
        return self.symbols[0]

    @property
    def donors(self) -> tuple[str, ...]:
        return self.symbols[: self.denticity]

    @property
    def pi_acceptor(self) -> bool:
        return self.pi_ratio.value < 0

    @property
    def is_chelate(self) -> bool:
        return self.denticity > 1

    @property
    def donor_separation_angstrom(self) -> float:
        """Donor–donor distance of a chelate (0 for a monodentate ligand)."""
        if not self.is_chelate:
            return 0.0
        return float(np.linalg.norm(self.positions_angstrom[0] - self.positions_angstrom[1]))

    def metal_position_angstrom(self, first_angstrom: float, second_angstrom: float | None = None) -> np.ndarray:
        """Where the metal sits in the fragment frame when the donors are these distances from it (a chelate's
        second donor at the first's distance unless given)."""
        if not self.is_chelate:
            return np.array([0.0, 0.0, -first_angstrom])
        second_angstrom = first_angstrom if second_angstrom is None else second_angstrom
        d = self.donor_separation_angstrom
        y = (second_angstrom**2 - first_angstrom**2) / (2.0 * d)  # from |M − D0| and |M − D1|, D0/D1 on ±y
        squared = first_angstrom**2 - (y - d / 2.0) ** 2
        if squared <= 0.0:
            raise InputError(f"chelate '{self.name}': its donors are {d:.2f} Å apart, too far to bind one metal at "
                             f"{first_angstrom:.2f}/{second_angstrom:.2f} Å; check the fragment's donor indices")
        return np.array([-np.sqrt(squared), y, 0.0])

    def bite_angle_deg(self, first_angstrom: float, second_angstrom: float | None = None) -> float:
        """D–M–D angle of a chelate whose donors sit at these distances from the metal."""
        metal = self.metal_position_angstrom(first_angstrom, second_angstrom)
        a, b = self.positions_angstrom[0] - metal, self.positions_angstrom[1] - metal
        return float(np.degrees(np.arccos(np.clip(a @ b / np.linalg.norm(a) / np.linalg.norm(b), -1.0, 1.0))))


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
            aliases=tuple(row["aliases"]),
            denticity=row.get("denticity", 1),
            distance_angstrom=row.get("distance_angstrom"),
            published_cone_deg=_sourced(row["tolman_cone_deg"], sources) if "tolman_cone_deg" in row else None,
            geometry_source=sources[row.get("geometry", "typical")],
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


def unknown_ligand_error(token: str, names) -> InputError:
    """One-line error for an unknown ligand name, with the closest known names (aliases included)."""
    names = sorted(set(names), key=str.lower)
    by_lower = {n.lower(): n for n in names}
    close = [by_lower[n] for n in difflib.get_close_matches(token.lower(), list(by_lower), n=4, cutoff=0.5)]
    hint = f"closest: {', '.join(close)}" if close else "`fourfold ligands` lists them"
    return InputError(f"unknown ligand {shown(token)} ({hint}); define others in a recipe's [ligands] table")


def get_ligand(name: str, extra: dict[str, Ligand] | None = None) -> Ligand:
    lookup = ligand_lookup(extra)
    if name in lookup:
        return lookup[name]
    raise unknown_ligand_error(name, lookup)


def custom_ligand(name: str, xyz: str, donor_index, charge: int, **parameters) -> Ligand:
    """A ligand from an XYZ fragment (lines 'Symbol x y z' in Å, optional count/comment header).

    ``donor_index`` is the donor's 0-based index, or a pair of indices for a chelate. The fragment is put
    in the frame of the module docstring: a monodentate ligand's centroid goes onto +z, a chelate's
    backbone (the centroid of its other atoms) onto +x. ``parameters`` may set f, pi_ratio, h, label,
    distance_angstrom.
    """
    if not isinstance(name, str) or not _NAME.match(name):
        raise InputError(f"ligand name {shown(name)}: use letters, digits and '_' (up to 24, a letter first), e.g. "
                         "MeCN; the name is written in formulas")
    symbols, positions = _parse_xyz(name, xyz)
    _check_atoms(name, positions)
    donors = [donor_index] if isinstance(donor_index, int) else list(donor_index)
    if not 1 <= len(donors) <= MAX_DENTICITY or len(set(donors)) != len(donors):
        raise InputError(f"ligand '{name}': give one donor index, or two different ones for a chelate, got {donor_index}")
    for index in donors:
        if not 0 <= index < len(symbols):
            raise InputError(f"ligand '{name}': donor_index {index} is outside the fragment's {len(symbols)} atoms (0-based)")
    for symbol in symbols:
        covalent_radius_angstrom(symbol)
    unknown = set(parameters) - _CUSTOM_KEYS
    if unknown:
        raise InputError(f"ligand '{name}': unknown keys {sorted(unknown)}; use {', '.join(sorted(_CUSTOM_KEYS))}")
    _check_parameters(name, parameters)
    order = donors + [i for i in range(len(symbols)) if i not in donors]
    symbols = tuple(symbols[i] for i in order)
    positions = positions[order]
    positions = _chelate_frame(name, positions) if len(donors) == 2 else _monodentate_frame(positions)
    values = {key: Sourced(float(parameters[key]), "recipe") if key in parameters else Sourced(default, CUSTOM_SOURCE)
              for key, default in _CUSTOM_DEFAULTS.items()}
    return Ligand(
        name=name,
        label=parameters.get("label", name),
        charge=int(charge),
        symbols=symbols,
        positions_angstrom=positions,
        aliases=(),
        distance_angstrom=parameters.get("distance_angstrom"),
        denticity=len(donors),
        **values,
    )


def with_parameters(ligand: Ligand, **values: float) -> Ligand:
    """Copy of a ligand with some ligand-field parameters overridden (source: 'override')."""
    unknown = set(values) - set(_PARAMETER_KEYS)
    if unknown:
        raise InputError(f"cannot set {sorted(unknown)} on ligand {ligand.name}: settable are {sorted(_PARAMETER_KEYS)}")
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


def _check_parameters(name: str, parameters: dict) -> None:
    for key in (*_PARAMETER_KEYS, "distance_angstrom"):
        value = parameters.get(key, 0.0)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise InputError(f"ligand '{name}': {key} must be a finite number, got {shown(value)}")
    distance = parameters.get("distance_angstrom")
    if distance is not None and not _DISTANCE_RANGE_ANGSTROM[0] <= distance <= _DISTANCE_RANGE_ANGSTROM[1]:
        low, high = _DISTANCE_RANGE_ANGSTROM
        raise InputError(f"ligand '{name}': distance_angstrom {distance} is no metal–donor distance: give {low}–{high} Å")
    label = parameters.get("label", name)
    if not isinstance(label, str) or not label.isprintable():
        raise InputError(f"ligand '{name}': label must be one line of printable text, got {shown(label)}")


def _monodentate_frame(positions: np.ndarray) -> np.ndarray:
    """Donor (row 0) at the origin, the fragment's centroid on +z."""
    positions = positions - positions[0]
    return positions @ _rotation_to_z(positions).T


def _chelate_frame(name: str, positions: np.ndarray) -> np.ndarray:
    """Donors (rows 0, 1) on ±y about the origin, the backbone's centroid on +x (the metal goes on −x)."""
    positions = positions - (positions[0] + positions[1]) / 2.0
    y = positions[0] / np.linalg.norm(positions[0])
    backbone = positions[2:].mean(axis=0) if len(positions) > 2 else np.zeros(3)
    x = backbone - (backbone @ y) * y
    if np.linalg.norm(x) < 0.1:
        raise InputError(f"chelate '{name}': the fragment's other atoms do not lie to one side of its two donors, "
                         "so the metal's side is unclear; check the donor indices")
    x /= np.linalg.norm(x)
    return positions @ np.column_stack([x, y, np.cross(x, y)])


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
