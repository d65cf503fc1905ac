"""The ligand library as a chemist browses it: one row per ligand, one entry in full, and a text table.

Kept apart from ``chem.ligands`` because an entry needs the cone angles (``geometry.cone``) and the
ligand-field parameters the estimate would use (``field.estimate``), which both import the ligands.
e_σ and e_π are shown for Ni(II), the ion of the library's textbook cases; the estimate recomputes them
for every metal from the same f and pi_ratio.
"""

from __future__ import annotations

from collections import Counter

from ..geometry.cone import donor_cone_angles_deg
from .ligands import Ligand, bundled_ligands, covalent_radius_angstrom, ligand_lookup, unknown_ligand_error
from .metals import Sourced, get_metal

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
    from ..field.estimate import DEFAULT_E_SCALE, e_parameters_cm, steric_cone_deg

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


def ligands_text(rows: list[dict]) -> str:
    """The library as a monospace table; the sources of f, pi_ratio and the published cone angles as notes."""
    notes: dict[str, int] = {}

    def mark(pair: dict | None) -> str:
        if pair is None:
            return ""
        return f"[{notes.setdefault(pair['source'], len(notes) + 1)}]"

    headers = ["ligand", "formula", "dent.", "donors", "charge", "e_σ / e_π at Ni²⁺ (cm⁻¹)", "f", "cone (°)",
               "Tolman (°)", "bite (°)"]
    body = []
    for row in rows:
        published = row["published_cone_angle_deg"]
        body.append([
            row["name"], row["formula"], str(row["denticity"]), ",".join(row["donors"]), f"{row['charge']:+d}",
            f"{row['e_sigma_ni2_cm']['value']:,.0f} / {row['e_pi_ni2_cm']['value']:,.0f}",
            f"{row['f']['value']:g} {mark(row['f'])}",
            " / ".join(f"{x:.0f}" for x in row["cone_angle_deg"]),
            "" if published is None else f"{published['value']:.0f} {mark(published)}",
            "" if row["bite_angle_deg"] is None else f"{row['bite_angle_deg']:.1f}",
        ])
    widths = [max(len(x) for x in column) for column in zip(headers, *body)]

    def line(cells) -> str:
        return "  ".join(cell.ljust(width) for cell, width in zip(cells, widths)).rstrip()

    g = get_metal(REFERENCE_ION[0]).g(REFERENCE_ION[1]).value
    lines = [line(headers), line(["-" * w for w in widths]), *(line(cells) for cells in body), ""]
    lines.append(f"e_σ, e_π: Δ = 1.5·f·g with g(Ni²⁺) = {g} kK, Δ = 3e_σ − 4e_π, e_π = pi_ratio·e_σ (fourfold.field.estimate). "
                 "Cone: exact cone about the M–donor axis of the built fragment, M–donor 2.28 Å, Bondi radii, "
                 "per donor for chelates; Tolman: published. Bite: D–M–D at the start M–donor distance.")
    lines += [f"[{number}] {source}" for source, number in notes.items()]
    return "\n".join(lines)
