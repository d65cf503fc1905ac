"""Records: one self-contained JSON file per finished job beside the store, so nothing finished is lost.

The driver writes `records/<job key>.json` (the job's task, spec, parent, label and its whole result with the
structure) before the row goes into the store. The store can be rebuilt from the records alone
(`fourfold rebuild DIR`), and a record whose row never reached the store (the driver stopped in between, a
PostgreSQL server went away) is stored by the next run. Each file is written whole: a temporary name unique to
the writing process, fsync, rename, fsync of the folder, so a crash or a full disk leaves the old file or the
new one, never half of either.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path

from .jobs import Job, JobSpec

FOLDER = "records"
FORMAT = 1  # the record layout; a reader refuses others
_KEY = re.compile(r"^[0-9a-f]{64}$")


def write_atomic(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` so that it appears whole or not at all, and stays after a power cut."""
    path = Path(path)
    partial = path.with_name(f".{path.name}.{os.getpid()}.partial")  # unique: two processes never share one
    try:
        with open(partial, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.replace(partial, path)
    except BaseException:
        partial.unlink(missing_ok=True)
        raise
    folder = os.open(path.parent, os.O_RDONLY)
    try:
        os.fsync(folder)  # the rename itself is durable only once the folder is on disk
    finally:
        os.close(folder)


def write_text_atomic(path: Path, text: str) -> None:
    write_atomic(path, text.encode("utf-8"))


@dataclass(frozen=True)
class Record:
    job: Job
    result: dict


class RecordShelf:
    """The `records/` folder of a study folder."""

    def __init__(self, study_folder):
        self.folder = Path(study_folder) / FOLDER

    def path(self, key: str) -> Path:
        return self.folder / f"{key}.json"

    def write(self, job: Job, result: dict) -> None:
        from ase.io.jsonio import encode  # numpy arrays and NaN round-trip as the store keeps them

        self.folder.mkdir(parents=True, exist_ok=True)
        record = {"format": FORMAT, "job_key": job.key, "task": job.task, "spec": job.spec.to_dict(),
                  "parent": job.parent, "final": job.final, "label": job.label, "result": result}
        write_atomic(self.path(job.key), encode(record).encode("utf-8"))

    def remove(self, keys) -> None:
        for key in keys:
            self.path(key).unlink(missing_ok=True)

    def keys(self) -> set[str]:
        """Keys of the records on the shelf (without reading them)."""
        if not self.folder.is_dir():
            return set()
        return {p.stem for p in self.folder.glob("*.json") if _KEY.match(p.stem)}

    def read(self, keys=None) -> tuple[list[Record], list[Path]]:
        """The readable records (of ``keys``, or all), and the paths of those that cannot be read."""
        wanted = sorted(self.keys() if keys is None else keys)
        found, unreadable = [], []
        for key in wanted:
            record = _parsed(self.path(key))
            if record is None:
                unreadable.append(self.path(key))
            else:
                found.append(record)
        return found, unreadable

    def remove_partials(self) -> None:
        """Temporary files left by a writer that died before its rename."""
        if self.folder.is_dir():
            for partial in self.folder.glob(".*.partial"):
                partial.unlink(missing_ok=True)


def _parsed(path: Path) -> Record | None:
    """A record, or None when the file is damaged, of another format, or not what its name says."""
    from ase.io.jsonio import decode

    try:
        data = decode(path.read_text(encoding="utf-8"))
        result = data["result"]
        if data.get("format") != FORMAT or data["job_key"] != path.stem or result["status"] not in ("done", "failed"):
            return None
        if len(result["symbols"]) != len(result["positions_angstrom"]):
            return None
        job = Job(data["job_key"], data["task"], JobSpec.from_dict(data["spec"]), data["parent"], bool(data["final"]),
                  str(data["label"]))
    except (OSError, ValueError, KeyError, TypeError, AttributeError):  # every way a damaged file can fail to parse
        return None
    return Record(job, result)
