"""Nothing finished is lost: a damaged or missing results.db is named in one line with the way back, and
`fourfold rebuild` makes it again from the records every finished job leaves in records/.

The damage is done to real files the way it happens: a copy cut short (a full disk, an interrupted copy), a
header overwritten, tables gone, the file deleted. SQLite reports a cut file as "database disk image is
malformed" and a foreign header as "file is not a database" (SQLite documentation, "Result and Error
Codes": SQLITE_CORRUPT and SQLITE_NOTADB — from memory).
"""

from __future__ import annotations

import json
import sqlite3

import pytest
from faultkit import ZINC_JOBS, check_kept, command, fault, fourfold, one_line, stored


def _damage(folder, how: str) -> None:
    path = folder / "results.db"
    if how == "cut to 0 bytes":
        path.write_bytes(b"")
    elif how == "cut to 100 bytes":
        path.write_bytes(path.read_bytes()[:100])
    elif how == "cut in half":
        path.write_bytes(path.read_bytes()[: path.stat().st_size // 2])
    elif how == "header overwritten":
        data = bytearray(path.read_bytes())
        data[:16] = b"not a database!!"
        path.write_bytes(bytes(data))
    elif how == "tables dropped":
        with sqlite3.connect(path) as con:
            con.execute("drop table systems")
    elif how == "deleted":
        path.unlink()


DAMAGE = ["cut to 0 bytes", "cut to 100 bytes", "cut in half", "header overwritten", "tables dropped", "deleted"]


@pytest.mark.parametrize("how", DAMAGE)
def test_damaged_store_is_one_line_then_rebuilt_whole(zinc_copy, zinc_done, how):
    before = stored(zinc_done)
    _damage(zinc_copy, how)
    fault(f"results.db {how}")
    commands = [("status", zinc_copy)]
    if how in ("cut in half", "deleted"):  # each command opens the store the same way: two kinds suffice for all three
        commands += [("report", zinc_copy), ("run", zinc_copy / "recipe.toml", "--out", zinc_copy, "--quiet")]
    for args in commands:
        result = (fourfold if args[0] == "run" else command)(*args, what=f"{args[0]} on a results.db {how}")
        assert result.returncode == 1, result.stderr
        line = one_line(result.stderr)
        assert "results.db" in line and f"fourfold rebuild {zinc_copy}" in line, line
    rebuilt = command("rebuild", zinc_copy, what=f"rebuild after {how}")
    assert rebuilt.returncode == 0, rebuilt.stderr
    assert f"{ZINC_JOBS} results, 0 failed, 0 records unreadable" in rebuilt.stdout
    check_kept(before, stored(zinc_copy), f"rebuild after results.db {how}")
    if how != "deleted":  # the damaged file is kept aside, never deleted
        assert len(list(zinc_copy.glob("results.db.before-rebuild-*"))) == 1
    status = command("status", zinc_copy, "--json", what="status after the rebuild")
    assert json.loads(status.stdout)["done"] == ZINC_JOBS


def test_unreadable_records_are_counted_and_the_rest_recovered(zinc_copy, zinc_done):
    records = sorted((zinc_copy / "records").glob("*.json"))
    assert len(records) == ZINC_JOBS
    records[0].write_text(records[0].read_text()[:50])  # cut short
    fault("a record cut short")
    (zinc_copy / "records" / f".{records[1].name}.4242.partial").write_text("{")  # a writer that died mid-write
    fault("a temporary record left by a dead writer")
    _damage(zinc_copy, "cut in half")
    fault("results.db cut in half")
    rebuilt = command("rebuild", zinc_copy, what="rebuild with a damaged record")
    assert rebuilt.returncode == 0, rebuilt.stderr
    assert "1 results, 0 failed, 1 records unreadable" in rebuilt.stdout and records[0].name in rebuilt.stdout
    assert not list((zinc_copy / "records").glob(".*.partial"))
    survivor = records[1].stem
    check_kept({survivor: stored(zinc_done)[survivor]}, stored(zinc_copy), "rebuild with one damaged record")


def test_a_record_whose_row_never_reached_the_store_is_stored_by_the_next_run(zinc_copy, zinc_done):
    """The driver stopped between writing a record and its row: the next run stores the row, runs nothing."""
    from fourfold.study.store import ResultStore

    key = sorted(stored(zinc_done))[0]
    ResultStore(zinc_copy / "results.db").remove([key])
    fault("a finished job's row missing from the store")
    rerun = fourfold("run", zinc_copy / "recipe.toml", "--out", zinc_copy, "--quiet", what="run with a row missing")
    assert rerun.returncode == 0, rerun.stderr
    assert "0 run now" in rerun.stdout
    check_kept(stored(zinc_done), stored(zinc_copy), "row restored from its record")


def test_a_folder_from_before_records_gets_them_on_its_next_run(zinc_copy, zinc_done):
    import shutil

    shutil.rmtree(zinc_copy / "records")
    fault("a study folder without records")
    rerun = fourfold("run", zinc_copy / "recipe.toml", "--out", zinc_copy, "--quiet", what="run that writes records")
    assert rerun.returncode == 0 and "0 run now" in rerun.stdout, rerun.stderr
    assert len(list((zinc_copy / "records").glob("*.json"))) == ZINC_JOBS
    _damage(zinc_copy, "header overwritten")
    fault("results.db header overwritten")
    assert command("rebuild", zinc_copy, what="rebuild from written-back records").returncode == 0
    check_kept(stored(zinc_done), stored(zinc_copy), "rebuild from records written back from the store")


def test_rebuild_salvages_rows_without_records_from_a_readable_store(zinc_copy, zinc_done):
    import shutil

    shutil.rmtree(zinc_copy / "records")
    fault("rebuild of a folder whose records are all gone")
    rebuilt = command("rebuild", zinc_copy, what="rebuild salvaging rows")
    assert rebuilt.returncode == 0, rebuilt.stderr
    assert f"{ZINC_JOBS} results" in rebuilt.stdout and f"{ZINC_JOBS} rows salvaged" in rebuilt.stdout
    check_kept(stored(zinc_done), stored(zinc_copy), "rebuild salvaging rows")


def test_rebuild_of_what_is_no_study_folder_is_one_line(tmp_path):
    result = command("rebuild", tmp_path, what="rebuild of an empty folder")
    fault("rebuild of a folder that is no study")
    assert result.returncode == 2 and "not a fourfold study folder" in one_line(result.stderr)


def test_a_record_holds_everything_a_row_does(zinc_done):
    """The record of a finished job carries its whole result, structure included (rebuild needs nothing else)."""
    from fourfold.study.records import RecordShelf
    from fourfold.study.store import ResultStore

    records, unreadable = RecordShelf(zinc_done).read()
    store = ResultStore(zinc_done / "results.db", create=False)
    assert not unreadable and len(records) == ZINC_JOBS
    for record in records:
        row = store.get(record.job.key)
        for name in ("status", "energy_hartree", "symbols", "converged", "tau4", "wall_seconds"):
            assert record.result[name] == row[name], name
        assert record.result["positions_angstrom"] == row["positions_angstrom"]  # to the last bit
