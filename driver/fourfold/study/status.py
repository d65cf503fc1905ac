"""What a study folder holds: done / failed / pending jobs, from its copied recipe and its store."""

from __future__ import annotations

from pathlib import Path

from ..errors import InputError
from .jobs import expand
from .recipe import load_recipe
from .store import ResultStore


def folder_status(folder) -> dict:
    folder = Path(folder)
    recipe = folder / "recipe.toml"
    if not recipe.exists() or not (folder / "results.db").exists():
        raise InputError(f"{folder} is not a fourfold study folder (no recipe.toml and results.db): give the --out "
                         "folder of a run")
    study = load_recipe(recipe)
    jobs = expand(study)
    store = ResultStore(folder / "results.db")
    stored = store.status()
    failures = []
    for job in jobs:
        if stored.get(job.key) == "failed":
            result = store.get(job.key)
            failures.append({"label": job.label, "task": job.task, "reason": result.get("reason", "unknown")})
    done = sum(1 for j in jobs if stored.get(j.key) == "done")
    return {"folder": str(folder), "title": study.title, "level": study.level.name, "total": len(jobs), "done": done,
            "failed": len(failures), "pending": len(jobs) - done - len(failures), "failures": failures}
