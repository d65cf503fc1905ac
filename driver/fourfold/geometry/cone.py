"""Steric size of a ligand from its built fragment: the cone angle about the metal–donor axis.

Tolman's cone angle (C. A. Tolman, Chem. Rev. 1977, 77, 313, from memory) is the apex angle of the cone,
apex at the metal 2.28 Å from the donor, that just encloses the van der Waals spheres of the ligand's
substituents. Here each substituent (the atoms hanging off one of the donor's bonds) gets its exact
half-angle about the metal–donor axis, max_i [∠(axis, r_i) + asin(R_i / |r_i|)] over its atoms i at r_i from
the metal with van der Waals radius R_i (Bondi 1964, data/vdw_radii.toml), and the cone angle is twice
the mean of the substituents' half-angles — Tolman's rule for unlike substituents, and the exact cone
about the axis when they are alike. The donor itself is left out, as in Tolman's definition; a one-atom
ligand (Cl⁻) is the cone of its own sphere. Tolman measured space-filling models with the substituents
folded back as far as they go; this is the cone of one relaxed conformer, so it can come out wider.

A chelate's donor gets the cone of its own half of the ligand, about its own metal–donor axis with the
metal where the fragment puts it at 2.28 Å from both donors. As in Tolman's treatment of chelating
diphosphines (Tolman 1977, from memory), the backbone — the substituent on the shortest path to the other
donor — counts with half the bite angle (the angle from the M–donor axis to the bisector of D–M–D), the
other substituents as above: dmpe comes out at Tolman's 107°.
"""

from __future__ import annotations

from functools import cache

import numpy as np

from ..chem.ligands import Ligand, covalent_radius_angstrom
from ..data import load_table
from ..errors import InputError

# Tolman's M–P distance for cone angles (Tolman 1977, from memory); used for every donor so that cone
# angles measure the ligand, not the metal.
TOLMAN_METAL_DONOR_ANGSTROM = 2.28
_BOND_FACTOR = 1.25  # atoms closer than 1.25 × (sum of covalent radii) are bonded [common practice, no source]


@cache
def _vdw_table() -> dict:
    return load_table("vdw_radii")


def vdw_radius_angstrom(symbol: str) -> float:
    radii = _vdw_table()["radii_pm"]
    if symbol not in radii:
        raise InputError(f"no van der Waals radius for element '{symbol}': fourfold knows {', '.join(radii)}")
    return radii[symbol][0] / 100.0


def vdw_source(symbol: str) -> str:
    table = _vdw_table()
    return table["sources"][table["radii_pm"][symbol][1]]


def _bonds(symbols, positions: np.ndarray) -> np.ndarray:
    radii = np.array([covalent_radius_angstrom(s) for s in symbols])
    bonded = np.linalg.norm(positions[:, None] - positions[None], axis=2) < _BOND_FACTOR * (radii[:, None] + radii[None])
    np.fill_diagonal(bonded, False)
    return bonded


def _bond_counts(bonded: np.ndarray, start: int, blocked: int | None = None) -> np.ndarray:
    """Number of bonds from atom ``start`` to every atom, not passing through ``blocked`` (n + 1 where unreached)."""
    far = len(bonded) + 1
    distance = np.full(len(bonded), far)
    distance[start] = 0
    frontier = [start]
    while frontier:
        following = []
        for atom in frontier:
            for other in np.flatnonzero(bonded[atom]):
                if other != blocked and distance[other] == far:
                    distance[other] = distance[atom] + 1
                    following.append(other)
        frontier = following
    return distance


def _substituents(ligand: Ligand, donor: int) -> tuple[list[list[int]], int]:
    """Per bond of the donor, the atoms hanging off it; for a chelate also how many of the donor's bonds lead
    along the backbone (returned last, not as atom groups)."""
    bonded = _bonds(ligand.symbols, ligand.positions_angstrom)
    far = len(bonded) + 1
    neighbours = [i for i in np.flatnonzero(bonded[donor]) if i >= ligand.denticity]
    own = range(ligand.denticity, len(bonded))
    backbone = []
    if ligand.is_chelate:
        # a ring substituent reaches the other donor both ways round: only its own half counts
        mine, to_other = _bond_counts(bonded, donor), _bond_counts(bonded, 1 - donor)
        own = [i for i in own if mine[i] <= to_other[i]]
        shortest = min(to_other[i] for i in neighbours)
        backbone = [i for i in neighbours if to_other[i] == shortest]
    groups = []
    for first in neighbours:
        if first not in backbone:
            reached = _bond_counts(bonded, first, blocked=donor)
            groups.append([i for i in own if reached[i] < far])
    return groups, len(backbone)


def cone_angle_deg(ligand: Ligand, donor: int = 0, metal_donor_angstrom: float = TOLMAN_METAL_DONOR_ANGSTROM) -> float:
    """Cone angle (degrees) of one donor of a ligand's fragment, apex at the metal (360 if it wraps round)."""
    metal = ligand.metal_position_angstrom(metal_donor_angstrom)
    axis = ligand.positions_angstrom[donor] - metal
    axis /= np.linalg.norm(axis)

    def half_angle_deg(atoms) -> float:
        half = 0.0
        for i in atoms:
            r = ligand.positions_angstrom[i] - metal
            distance = np.linalg.norm(r)
            radius = vdw_radius_angstrom(ligand.symbols[i])
            if radius >= distance:
                return 180.0
            off_axis = np.degrees(np.arccos(np.clip(r @ axis / distance, -1.0, 1.0)))
            half = max(half, off_axis + np.degrees(np.arcsin(radius / distance)))
        return half

    groups, backbone = _substituents(ligand, donor)
    halves = [half_angle_deg(group) for group in groups]
    if backbone:
        halves += [ligand.bite_angle_deg(metal_donor_angstrom) / 2.0] * backbone
    return float(min(2.0 * np.mean(halves or [half_angle_deg([donor])]), 360.0))


def donor_cone_angles_deg(ligand: Ligand) -> tuple[float, ...]:
    """Cone angle of each donor of a ligand (one value for a monodentate ligand)."""
    return tuple(cone_angle_deg(ligand, donor) for donor in range(ligand.denticity))
