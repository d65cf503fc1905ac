"""The ligand library as a chemist browses it: one row per ligand, one entry in full, and a text table.

Kept apart from ``chem.ligands`` because an entry needs the cone angles (``geometry.cone``) and the
ligand-field parameters the estimate would use (``field.estimate``), which both import the ligands.
e_σ and e_π are shown for Ni(II), the ion of the library's textbook cases; the estimate recomputes them
for every metal from the same f and pi_ratio.
"""

from __future__ import annotations

from collections import Counter

from ..chem.ligands import Ligand, bundled_ligands, covalent_radius_angstrom, ligand_lookup, unknown_ligand_error
from ..chem.metals import Sourced, get_metal
from ..geometry.cone import donor_cone_angles_deg

REFERENCE_ION = ("Ni", 2)


def hill_formula(symbols) -> str:
    """C first, then H, then the rest alphabetically (Hill order)."""
    counts = Counter(symbols)
    order = [s for s in ("C", "H") if s in counts] if "C" in counts else []
    order += sorted(s for s in counts if s not in order)
    return "".join(f"{s}{counts[s] if counts[s] > 1 else ''}" for s in order)


def _pair(value: Sourced | None) -> dict | None:
    return None if value is None else {"value": value.value, "source": value.source}


def ligand_entry(name: str, extra: dict[str, Ligand] | None = None) -> dict:
    """Everything fourfold knows about one ligand (name or alias), as plain data."""
    lookup = ligand_lookup(extra)
    if name not in lookup:
        raise unknown_ligand_error(name, lookup)
    return _entry(lookup[name])


def ligand_table(extra: dict[str, Ligand] | None = None) -> list[dict]:
    """One entry per ligand, bundled ones in library order, then any custom ones."""
    ligands = {**bundled_ligands(), **(extra or {})}
    return [_entry(ligand) for ligand in ligands.values()]


def _entry(ligand: Ligand) -> dict:
    from .estimate import DEFAULT_E_SCALE, e_parameters_cm, steric_cone_deg

    metal = get_metal(REFERENCE_ION[0])
    e_sigma, e_pi = e_parameters_cm(ligand.f, ligand.pi_ratio, metal.g(REFERENCE_ION[1]), DEFAULT_E_SCALE)
    distance = ligand.distance_angstrom or metal.radius_angstrom + covalent_radius_angstrom(ligand.donor)
    return {
        "name": ligand.name,
        "label": ligand.label,
        "aliases": list(ligand.aliases),
        "formula": hill_formula(ligand.symbols),
        "charge": ligand.charge,
        "denticity": ligand.denticity,
        "donors": list(ligand.donors),
        "f": _pair(ligand.f),
        "pi_ratio": _pair(ligand.pi_ratio),
        "h": _pair(ligand.h),
        "e_sigma_ni2_cm": _pair(e_sigma),
        "e_pi_ni2_cm": _pair(e_pi),
        "cone_angle_deg": [round(x, 1) for x in donor_cone_angles_deg(ligand)],
        "published_cone_angle_deg": _pair(ligand.published_cone_deg),
        "steric_cone_deg": round(steric_cone_deg(ligand).value, 1),
        "bite_angle_deg": round(ligand.bite_angle_deg(distance), 1) if ligand.is_chelate else None,
        "geometry": ligand.geometry_source,
        "atoms": len(ligand.symbols),
    }
