"""Files a chemist takes away: extended XYZ structures with energies and 2S in the header."""

from __future__ import annotations

import re
from pathlib import Path

from ..chem.notation import formula_slug
from ..geometry.shape import geometry_indices


def structure_filename(atoms, suffix: str = "") -> str:
    """'NiCl4_2-_SP-4_trans.xyz' style names: formula, arrangement, isomer, then an optional suffix."""
    info = atoms.info
    parts = [formula_slug(info["formula"]), info["arrangement"], info.get("isomer", ""), suffix]
    return re.sub(r"[^A-Za-z0-9+\-_.,]", "", "_".join(p for p in parts if p)) + ".xyz"


def write_extxyz(atoms, path: Path) -> Path:
    """Write one structure as extended XYZ; ``atoms.info`` (plain scalars) goes into the comment line."""
    from ase.io import write

    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    clean = atoms.copy()
    # ASE writes an empty string as a bare `key=` and misreads the line after it: leave empty values out
    clean.info = {k: v for k, v in atoms.info.items() if isinstance(v, (str, int, float, bool)) and v != ""}
    write(path, clean, format="extxyz")
    return path


def write_ideal_structures(structures, out_dir) -> list[dict]:
    """Write each ideal structure and return one row per structure: file, arrangement, isomer, indices."""
    rows = []
    for atoms in structures:
        path = write_extxyz(atoms, Path(out_dir) / structure_filename(atoms))
        indices = geometry_indices(atoms, atoms.info["donor_indices"])
        rows.append({
            "arrangement": atoms.info["arrangement"], "isomer": atoms.info["isomer"],
            "ligand_order": atoms.info["ligand_order"], "file": str(path), "atoms": len(atoms),
            "tau4": indices["tau4"], "tau4_prime": indices["tau4_prime"],
            "nearest_shape": indices["nearest_shape"], "shape_measures": indices["shape_measures"],
        })
    return rows
