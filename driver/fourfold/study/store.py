"""The results store: one ASE database (SQLite `results.db`, or PostgreSQL) row per finished job.

Only the driver process writes. Rows carry the structure (relaxed, or the start geometry of a failed job)
and the key-value pairs `job_key`, `status` ('done' | 'failed'), `task`, `arrangement`, `isomer`, `spin2s`,
`energy_hartree`, `converged`, plus `complex_formula` (ASE reserves `formula`), `kind`, `engine`; everything else of the result sits in
`data`. ASE's own lock file is switched off: a lock left by a killed process would block the rerun, and
with a single writer it protects nothing (the run lock in fourfold.study.runner keeps writers single).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np

from ..errors import InputError

_COLUMNS = {"task": "task", "arrangement": "arrangement", "isomer": "isomer", "spin2s": "spin2s", "kind": "kind",
            "complex_formula": "formula"}


def _initialised_sqlite(path: Path) -> str:
    """Path of a ready SQLite results file. A new file is made under a temporary name and renamed into place,
    so a driver killed while ASE creates the tables never leaves a half-made database behind; a file
    that has no tables yet (left by an older, interrupted start) holds no results and is made anew."""
    import os
    import sqlite3

    from ase.db import connect

    path.parent.mkdir(parents=True, exist_ok=True)
    if path.exists():
        with sqlite3.connect(path) as con:
            tables = {row[0] for row in con.execute("select name from sqlite_master where type='table'")}
        if "information" in tables:
            return str(path)
        path.unlink()
    partial = path.with_name(path.name + ".new")
    partial.unlink(missing_ok=True)
    connect(str(partial), type="db", use_lock_file=False).count()  # creates the tables
    os.replace(partial, path)
    return str(path)


def _redacted(url: str) -> str:
    """A database URL without its password, for messages."""
    return re.sub(r"(://[^:/@]+):[^@]*@", r"\1:***@", url)


def _connected_postgres(url: str):
    """An ASE database on a PostgreSQL server (through ase-db-backends), its tables made if new.

    Each write is one transaction, so a driver killed mid-write leaves no half row; nothing like SQLite's
    temporary-file dance is needed."""
    from ase.db import connect

    try:
        import ase_db_backends.postgresql  # noqa: F401  (ASE finds the backend there)
        import psycopg2
    except ImportError:
        raise InputError("--store postgresql://… needs the postgres extra: pip install \"fourfold[postgres]\"") from None
    db = connect(url)
    try:
        db.count()  # connects, and creates the tables on first use
    except psycopg2.Error as error:
        first = str(error).strip().splitlines()[0] if str(error).strip() else type(error).__name__
        raise InputError(f"cannot use the PostgreSQL store {_redacted(url)} ({first}); check host, port, user, "
                         "password (~/.pgpass or PGPASSWORD) and that the database exists") from None
    return db


class ResultStore:
    def __init__(self, url_or_path):
        from ase.db import connect

        text = str(url_or_path)
        if text.startswith(("postgresql://", "postgres://")):
            self._db = _connected_postgres(text)
            text = _redacted(text)
        else:
            self._db = connect(_initialised_sqlite(Path(text)), type="db", use_lock_file=False)
        self.location = text

    def _rows(self, **selection):
        return self._db.select(**selection)

    def status(self) -> dict[str, str]:
        """job_key -> status for every stored job."""
        return {row.job_key: row.status for row in self._rows()}

    def get(self, key: str) -> dict | None:
        """A stored result as plain data (the same shape a worker returns), or None."""
        rows = list(self._rows(job_key=key))
        if not rows:
            return None
        row = rows[-1]
        result = dict(row.data)
        result.update(status=row.status, job_key=row.job_key)
        for name in ("energy_hartree", "converged"):
            if name in row:
                result[name] = row[name]
        result["symbols"] = row.toatoms().get_chemical_symbols()
        result["positions_angstrom"] = row.positions.tolist()
        return result

    def results(self) -> list[dict]:
        return [self.get(row.job_key) for row in self._rows()]

    def record(self, job, result: dict) -> None:
        """Write one finished job (done or failed); a retried job replaces its earlier row."""
        from ase import Atoms

        self.remove([job.key])
        atoms = Atoms(symbols=result["symbols"], positions=np.asarray(result["positions_angstrom"], dtype=float))
        spec = job.spec.to_dict()
        pairs = {"job_key": job.key, "status": result["status"], "engine": job.spec.method}
        for column, name in _COLUMNS.items():
            value = job.task if name == "task" else spec.get(name)
            if value is not None:
                pairs[column] = value
        if result.get("energy_hartree") is not None:
            pairs["energy_hartree"] = float(result["energy_hartree"])
        pairs["converged"] = bool(result.get("converged", False))
        data = {k: v for k, v in result.items()
                if k not in ("symbols", "positions_angstrom", "energy_hartree", "converged", "status")}
        data["spec"] = spec
        data["parent"] = job.parent
        data["final"] = job.final
        data["label"] = job.label
        self._db.write(atoms, key_value_pairs=pairs, data=data)

    def remove(self, keys) -> None:
        ids = [row.id for key in keys for row in self._rows(job_key=key)]
        if ids:
            self._db.delete(ids)
