"""The results store: one ASE database (SQLite `results.db`, or PostgreSQL) row per finished job.

Only the driver process writes. Rows carry the structure (relaxed, or the start geometry of a failed job)
and the key-value pairs `job_key`, `status` ('done' | 'failed'), `task`, `arrangement`, `isomer`, `spin2s`,
`energy_hartree`, `converged`, plus `complex_formula` (ASE reserves `formula`), `kind`, `engine`; everything
else of the result sits in `data`. ASE's own lock file is switched off: a lock left by a killed process would block the rerun, and
with a single writer it protects nothing (the run lock in fourfold.study.runner keeps writers single).

Every finished job also has a record in the study folder (fourfold.study.records), so the store can always be
rebuilt. A results.db that cannot be read (truncated, overwritten, its tables missing) is never repaired in
place or written over: opening it raises a StoreError whose one line says how to rebuild it
(``rebuild_sqlite``). A PostgreSQL server that goes away is retried with back-off before the run gives up.
"""

from __future__ import annotations

import json
import os
import re
import shlex
import sqlite3
import time
from contextlib import closing, contextmanager
from dataclasses import dataclass
from datetime import UTC, datetime
from pathlib import Path
from urllib.parse import unquote, urlsplit

import numpy as np

from ..errors import FourfoldError, InputError
from .records import Record, RecordShelf

_COLUMNS = {"task": "task", "arrangement": "arrangement", "isomer": "isomer", "spin2s": "spin2s", "kind": "kind",
            "complex_formula": "formula"}
_TABLES = {"systems", "keys", "text_key_values", "number_key_values", "species", "information"}
# Pauses between tries when the PostgreSQL server cannot be reached (31 s in all: a server restart or a
# network blip passes, a server that is gone ends the run). Test hook: FOURFOLD_STORE_RETRY_S="0.1,0.2".
RETRY_PAUSES_S = (1.0, 2.0, 4.0, 8.0, 16.0)
RETRY_ENV = "FOURFOLD_STORE_RETRY_S"


class StoreError(FourfoldError):
    """The store cannot be read or written (damaged, disk full, server gone): the message says what to do."""


def _first_line(error: BaseException) -> str:
    text = str(error).strip()
    return text.splitlines()[0] if text else type(error).__name__


def redacted(url: str) -> str:
    """A database URL without its password (in the user part or as a `password=` parameter), for messages."""
    text = re.sub(r"(?i)(password=)[^&;\s]*", r"\1***", url)
    try:
        netloc = urlsplit(text).netloc
    except ValueError:
        return re.sub(r"(://[^:/@]+):.*@", r"\1:***@", text)
    userinfo, at, host = netloc.rpartition("@")
    if at and ":" in userinfo:
        text = text.replace(netloc, f"{userinfo.split(':', 1)[0]}:***@{host}", 1)
    return text


def _password(url: str) -> str | None:
    try:
        userinfo = urlsplit(url).netloc.rpartition("@")[0]
    except ValueError:
        return None
    return userinfo.split(":", 1)[1] if ":" in userinfo else None


def scrubbed(text: str, url: str) -> str:
    """``text`` (an error from the database driver) with the URL's password, as written or decoded, masked."""
    password = _password(url)
    for secret in filter(None, {password, unquote(password or "")}):
        text = text.replace(secret, "***")
    return text


def rebuild_hint(folder) -> str:
    return f"`fourfold rebuild {shlex.quote(str(folder))}`"


def sqlite_problem(path: Path) -> str | None:
    """Why the SQLite file at ``path`` cannot serve as a results store, or None if it can. Opened read-only:
    checking never changes the file."""
    try:
        with closing(sqlite3.connect(path.resolve().as_uri() + "?mode=ro", uri=True)) as con:
            tables = {row[0] for row in con.execute("select name from sqlite_master where type='table'")}
            if not _TABLES <= tables:
                return "its result tables are missing" if path.stat().st_size else "it is empty (0 bytes)"
            check = con.execute("pragma quick_check").fetchone()[0]
    except sqlite3.DatabaseError as error:
        return _first_line(error)
    return None if check == "ok" else check


@contextmanager
def sqlite_trouble(location: str, folder: Path):
    """SQLite errors inside the block become one-line StoreErrors that say what to do."""
    try:
        yield
    except sqlite3.OperationalError as error:
        reason = _first_line(error)
        if "full" in reason:
            hint = "free some space, then rerun the same command"
        elif "readonly" in reason or "unable to open" in reason:
            hint = "the study folder must be writable: fix its permissions or copy it somewhere writable"
        else:
            hint = f"if this persists, rebuild the store with {rebuild_hint(folder)}"
        raise StoreError(f"cannot use {location} ({reason}); {hint}; finished jobs are kept in "
                         f"{folder / 'records'}") from None
    except (sqlite3.DatabaseError, json.JSONDecodeError, UnicodeDecodeError) as error:  # or a row's data is garbled
        raise StoreError(f"{location} is damaged ({_first_line(error)}); rebuild it from the finished "
                         f"jobs' records with {rebuild_hint(folder)}") from None


def _paused(seconds: float) -> bool:
    """Wait ``seconds``, or less if the command is asked to stop meanwhile (then False: give up the retries,
    the record on disk keeps the result)."""
    from .stopping import stop_pending

    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if stop_pending():
            return False
        time.sleep(min(0.1, max(0.0, deadline - time.monotonic())))
    return not stop_pending()


def _retry_pauses() -> tuple[float, ...]:
    text = os.environ.get(RETRY_ENV)
    return tuple(float(x) for x in text.split(",")) if text else RETRY_PAUSES_S


def _created_sqlite(path: Path) -> None:
    """A new, empty results file, made under a name of this process and renamed into place, so a driver killed
    while ASE creates the tables never leaves a half-made database behind."""
    from ase.db import connect

    path.parent.mkdir(parents=True, exist_ok=True)
    partial = path.with_name(f".{path.name}.{os.getpid()}.new")
    partial.unlink(missing_ok=True)
    try:
        connect(str(partial), type="db", use_lock_file=False).count()  # creates the tables
        os.replace(partial, path)
    except BaseException:
        partial.unlink(missing_ok=True)
        raise


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
    try:
        db = connect(url)
        db.count()  # connects, and creates the tables on first use
    except (psycopg2.Error, ValueError) as error:
        raise InputError(f"cannot use the PostgreSQL store {redacted(url)} ({scrubbed(_first_line(error), url)}); "
                         "check host, port, user, password (~/.pgpass or PGPASSWORD) and that the database exists"
                         ) from None
    return db


class ResultStore:
    """``ResultStore(url_or_path, create=True)``: a PostgreSQL URL, or the path of a results.db (made when
    missing and ``create``; a damaged one raises StoreError)."""

    def __init__(self, url_or_path, create: bool = True):
        from ase.db import connect

        text = str(url_or_path)
        self._url = None
        if text.startswith(("postgresql://", "postgres://")):
            self._url = text
            self._db = _connected_postgres(text)
            self.location = redacted(text)
            return
        path = Path(text)
        self.location = text
        self._folder = path.parent
        if path.exists() and not os.access(path, os.R_OK):
            raise StoreError(f"cannot read {path} (permission denied): run as its owner or fix its permissions")
        if not path.exists():
            if RecordShelf(path.parent).keys():  # it held results once: made anew, they would all run again
                raise StoreError(f"{path} is missing; rebuild it from the finished jobs' records with "
                                 f"{rebuild_hint(path.parent)} (or delete {path.parent / 'records'} to start afresh)")
            if not create:
                raise StoreError(f"{path} is missing: run the study first, or give --store if its results are in "
                                 "PostgreSQL")
            self._guarded(_created_sqlite, path)
        else:
            problem = sqlite_problem(path)
            if problem:
                raise StoreError(f"{path} is damaged ({problem}); rebuild it from the finished jobs' records with "
                                 f"{rebuild_hint(path.parent)}")
        self._db = connect(str(path), type="db", use_lock_file=False)

    # -------------------------------------------------------------------------------- errors, retries

    def _guarded(self, function, *args):
        """Call ``function``; SQLite trouble becomes a one-line StoreError, a lost PostgreSQL server is retried."""
        if self._url:
            return self._retried(function, *args)
        with sqlite_trouble(self.location, self._folder):
            return function(*args)

    def _retried(self, function, *args):
        import psycopg2

        pauses = _retry_pauses()
        for pause in (*pauses, None):
            try:
                return function(*args)
            except (psycopg2.OperationalError, psycopg2.InterfaceError) as error:
                if pause is None or not _paused(pause):
                    raise StoreError(f"lost the PostgreSQL store {self.location} "
                                     f"({scrubbed(_first_line(error), self._url)}) and could not reconnect "
                                     f"({len(pauses)} tries over {sum(pauses):.0f} s); finished jobs are kept in the "
                                     "study folder's records/ and stored by the next run: rerun the same command "
                                     "when the server is back") from None

    # -------------------------------------------------------------------------------- reading

    def status(self) -> dict[str, str]:
        """job_key -> status for every stored job."""
        return self._guarded(lambda: {row.job_key: row.status for row in self._db.select()})

    def get(self, key: str) -> dict | None:
        """A stored result as plain data (the same shape a worker returns), or None."""
        return self._guarded(self._get, key)

    def _get(self, key: str) -> dict | None:
        rows = list(self._db.select(job_key=key))
        return _row_result(rows[-1]) if rows else None

    def results(self) -> list[dict]:
        return self._guarded(lambda: [_row_result(row) for row in self._db.select()])

    def records(self, keys) -> list[Record]:
        """The stored rows of ``keys`` as records (what a rebuild needs), for folders whose rows have none yet."""
        return self._guarded(lambda: [_row_record(row) for row in self._db.select() if row.job_key in keys])

    # -------------------------------------------------------------------------------- writing

    def record(self, job, result: dict) -> None:
        """Write one finished job (done or failed); a retried job replaces its earlier row. The new row is
        written before the old one goes, so the key is never without a row."""
        self._guarded(self._record, job, result)

    def _record(self, job, result: dict) -> None:
        from ase import Atoms

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
        new = self._db.write(atoms, key_value_pairs=pairs, data=data)
        self._remove([job.key], keep=new)

    def remove(self, keys) -> None:
        self._guarded(self._remove, keys)

    def _remove(self, keys, keep: int | None = None) -> None:
        ids = [row.id for key in keys for row in self._db.select(job_key=key) if row.id != keep]
        if ids:
            self._db.delete(ids)


def _row_result(row) -> dict:
    result = dict(row.data)
    result.update(status=row.status, job_key=row.job_key)
    for name in ("energy_hartree", "converged"):
        if name in row:
            result[name] = row[name]
    result["symbols"] = row.toatoms().get_chemical_symbols()
    result["positions_angstrom"] = row.positions.tolist()
    return result


def _row_record(row) -> Record:
    from .jobs import Job, JobSpec

    result = _row_result(row)
    for name in ("spec", "parent", "final", "label", "job_key"):
        result.pop(name, None)
    data = row.data
    job = Job(row.job_key, row.task, JobSpec.from_dict(dict(data["spec"])), data["parent"], bool(data["final"]),
              str(data["label"]))
    return Record(job, result)


def store_records(store: ResultStore, shelf: RecordShelf, stored: dict[str, str], study_keys=frozenset()) -> int:
    """Bring store and records level: rows for records the store lacks (a driver stopped between the two
    writes, a PostgreSQL server that went away), and records for the rows of ``study_keys`` that have none
    (folders from before records existed; a PostgreSQL store may hold other studies' rows too). ``stored``
    (key -> status) is updated; returns the number of rows added."""
    on_shelf = shelf.keys()
    records, _ = shelf.read(on_shelf - set(stored))
    for record in records:
        store.record(record.job, record.result)
        stored[record.job.key] = record.result["status"]
    unrecorded = (set(stored) & set(study_keys)) - on_shelf
    if unrecorded:
        for record in store.records(unrecorded):
            shelf.write(record.job, record.result)
    return len(records)


@dataclass
class Rebuilt:
    done: int
    failed: int
    unreadable: list[Path]
    salvaged: int  # rows of the old store that had no record yet
    kept_aside: Path | None  # where the old results.db went

    def summary_line(self) -> str:
        aside = f"; the old file is kept as {self.kept_aside}" if self.kept_aside else ""
        unreadable = f" ({', '.join(p.name for p in self.unreadable[:3])}{' …' if len(self.unreadable) > 3 else ''})"
        return (f"rebuilt the store from the records: {self.done} results, {self.failed} failed, "
                f"{len(self.unreadable)} records unreadable{unreadable if self.unreadable else ''}"
                + (f", {self.salvaged} rows salvaged from the old store" if self.salvaged else "") + aside)


def _salvaged(path: Path, shelf: RecordShelf) -> int:
    """Records for the readable rows of an old (maybe damaged) results.db that have none, row by row."""
    from ase.db import connect

    if not path.exists():
        return 0
    have, count = shelf.keys(), 0
    try:
        rows = connect(str(path), type="db", use_lock_file=False).select()
        for row in rows:
            try:
                if row.job_key not in have:
                    record = _row_record(row)
                    shelf.write(record.job, record.result)
                    have.add(record.job.key)
                    count += 1
            except (KeyError, ValueError, TypeError, AttributeError):
                continue  # one unreadable row: the next may read
    except (sqlite3.DatabaseError, ValueError):
        pass  # the rest of the file is beyond reading: its rows live on in their records, if any
    return count


def rebuild_sqlite(folder) -> Rebuilt:
    """A new results.db for ``folder`` from its records. The old file (damaged or not) is renamed aside with
    its journal, never deleted; the new one is made under a temporary name and renamed into place."""
    folder = Path(folder)
    path = folder / "results.db"
    shelf = RecordShelf(folder)
    shelf.remove_partials()
    salvaged = _salvaged(path, shelf)
    records, unreadable = shelf.read()
    partial = folder / f".results.db.{os.getpid()}.rebuild"
    partial.unlink(missing_ok=True)
    try:
        with sqlite_trouble(str(path), folder):
            _created_sqlite(partial)
        store = ResultStore(partial)
        for record in records:
            store.record(record.job, record.result)
    except BaseException:
        partial.unlink(missing_ok=True)
        raise
    aside = None
    if path.exists():
        stamp = datetime.now(UTC).strftime("%Y%m%dT%H%M%SZ")
        aside = path.with_name(f"{path.name}.before-rebuild-{stamp}")
        for suffix in ("-journal", "-wal", "-shm"):  # a journal beside the new file would be replayed into it
            companion = path.with_name(path.name + suffix)
            if companion.exists():
                os.replace(companion, aside.with_name(aside.name + suffix))
        os.replace(path, aside)
    os.replace(partial, path)
    done = sum(1 for r in records if r.result["status"] == "done")
    return Rebuilt(done, len(records) - done, unreadable, salvaged, aside)
