"""What a study's store holds: done / failed / running / pending jobs, per complex, with an ETA."""

from __future__ import annotations

import json
from pathlib import Path

from .jobs import expand


def _running(folder: Path) -> dict:
    """The running.json a live run keeps in its folder (empty when no run is on, or it was killed)."""
    from .runner import RunLock

    path = Path(folder) / "running.json"
    if not path.exists() or not RunLock.held_elsewhere(folder):
        return {}
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return {}


def study_status(study, store, folder) -> dict:
    """Counts of the study's jobs by their state in ``store`` (a ResultStore) and in the folder's live run,
    per complex and in all, each failure's reason and the estimated time left."""
    jobs = expand(study)
    stored = store.status()
    live = _running(folder)
    running_labels = set(live.get("running", []))
    failures, per_complex, seconds = [], {}, []
    for job in jobs:
        state = stored.get(job.key) or ("running" if job.label in running_labels else "pending")
        counts = per_complex.setdefault(job.spec.formula, {"done": 0, "failed": 0, "running": 0, "pending": 0})
        counts[state] += 1
        if state == "failed":
            result = store.get(job.key)
            failures.append({"label": job.label, "task": job.task, "reason": result.get("reason", "unknown")})
        elif state == "done":
            seconds.append(float((store.get(job.key) or {}).get("wall_seconds") or 0.0))
    total = {k: sum(c[k] for c in per_complex.values()) for k in ("done", "failed", "running", "pending")}
    left = total["running"] + total["pending"]
    eta = None
    if live and seconds and left:
        eta = sum(seconds) / len(seconds) * left / max(1, int(live.get("workers", 1)))
    return {"folder": str(folder), "title": study.title, "level": study.level.name, "store": store.location,
            "total": len(jobs), **total, "per_complex": per_complex, "failures": failures,
            "run_on": bool(live), "run_holder": f"pid {live['pid']} on {live['host']}" if live else None,
            "eta_seconds": eta}
