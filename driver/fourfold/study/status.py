"""What a study's store holds: done / failed / pending jobs, with the failures' reasons."""

from __future__ import annotations

from .jobs import expand


def study_status(study, store, folder) -> dict:
    """Counts of the study's jobs by their state in ``store`` (a ResultStore), and each failure's reason."""
    jobs = expand(study)
    stored = store.status()
    failures = []
    for job in jobs:
        if stored.get(job.key) == "failed":
            result = store.get(job.key)
            failures.append({"label": job.label, "task": job.task, "reason": result.get("reason", "unknown")})
    done = sum(1 for j in jobs if stored.get(j.key) == "done")
    return {"folder": str(folder), "title": study.title, "level": study.level.name, "store": store.location,
            "total": len(jobs), "done": done, "failed": len(failures), "pending": len(jobs) - done - len(failures),
            "failures": failures}
