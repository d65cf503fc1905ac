"""`scan`: every arrangement × isomer × 2S of one complex at one level, as typed records.

The API face of `fourfold run --formula`: it writes a one-complex recipe and runs it through the same
runner (so it resumes, isolates failures and never recomputes what its folder already holds).
"""

from __future__ import annotations

import json
import tempfile
from pathlib import Path

from .recipe import parse_recipe
from .runner import run_study


def scan_recipe_text(formula: str, level: str, relaxations=("held", "free"), arrangements=("T-4", "SP-4"),
                     spins=None) -> str:
    lines = [f"title = {json.dumps('Scan of ' + formula)}", f"level = {json.dumps(level)}",
             f"arrangements = {json.dumps(list(arrangements))}", f"relaxations = {json.dumps(list(relaxations))}",
             "", "[[complex]]", f"formula = {json.dumps(formula)}"]
    if spins:
        lines.append(f"spins = {json.dumps(list(spins))}")
    return "\n".join(lines) + "\n"


def scan(formula: str, level: str = "screen", out_dir=None, relaxations=("held", "free"),
         arrangements=("T-4", "SP-4"), spins=None, workers: int = 2, threads: int = 1):
    """Run the scan and return its ComplexComparison (``.records``: one StateRecord per state and kind)."""
    from ..report.comparison import comparison_for_folder

    study = parse_recipe(scan_recipe_text(formula, level, relaxations, arrangements, spins), "scan")
    out_dir = Path(out_dir) if out_dir else Path(tempfile.mkdtemp(prefix="fourfold-scan-"))
    run_study(study, out_dir, workers=workers, threads=threads)
    return comparison_for_folder(out_dir, study).complexes[0]
