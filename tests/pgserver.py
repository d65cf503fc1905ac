"""The PostgreSQL server and a fresh database per test, for the store tests (tests/test_cluster.py,
tests/faults/test_postgres_faults.py): the server `.ci/run` starts (FOURFOLD_TEST_POSTGRES), else one
started here from the distribution's binaries, else the tests skip saying why."""

from __future__ import annotations

import glob
import os
import shutil
import subprocess
import uuid
from pathlib import Path

import pytest


def _as_postgres_user(command: list) -> list:
    # The server refuses to run as root; Debian's package makes the `postgres` user for it.
    return ["runuser", "-u", "postgres", "--", *command] if os.geteuid() == 0 else command


def _start_own_server(folder: Path):
    """A throwaway server on 127.0.0.1 from Debian's binaries (for `pytest` run without .ci/run)."""
    binaries = sorted(glob.glob("/usr/lib/postgresql/*/bin"))
    if not binaries or (os.geteuid() == 0 and not shutil.which("runuser")):
        return None, None
    bin_dir = Path(binaries[-1])
    import socket

    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    folder.mkdir(parents=True, exist_ok=True)
    if os.geteuid() == 0:
        shutil.chown(folder, "postgres")
    data = folder / "data"
    run = dict(capture_output=True, text=True, cwd=folder)
    steps = [[str(bin_dir / "initdb"), "-D", str(data), "-U", "fourfold", "-A", "trust", "--no-sync"],
             [str(bin_dir / "pg_ctl"), "-D", str(data), "-l", str(folder / "server.log"), "-w", "-t", "60", "start",
              "-o", f"-c listen_addresses=127.0.0.1 -p {port} -k {folder} -c fsync=off"]]
    for step in steps:
        if subprocess.run(_as_postgres_user(step), **run).returncode != 0:
            return None, None
    stop = _as_postgres_user([str(bin_dir / "pg_ctl"), "-D", str(data), "-m", "immediate", "stop"])
    return f"postgresql://fourfold@127.0.0.1:{port}/postgres", stop


@pytest.fixture(scope="session")
def postgres_server():
    pytest.importorskip("psycopg2", reason="the postgres extra is not installed: pip install -e '.[test]'")
    url, stop = os.environ.get("FOURFOLD_TEST_POSTGRES"), None
    # Not under pytest's tmp folders: the server's user must be able to reach its data folder.
    own = Path(f"/tmp/fourfold-test-pg-{uuid.uuid4().hex[:8]}")
    if not url:
        url, stop = _start_own_server(own)
    if not url:
        shutil.rmtree(own, ignore_errors=True)
        pytest.skip("no PostgreSQL server: FOURFOLD_TEST_POSTGRES is unset and none could be started from "
                    "/usr/lib/postgresql/*/bin (.ci/run installs Debian's postgresql and starts one)")
    try:
        yield url
    finally:
        if stop:
            subprocess.run(stop, capture_output=True)
        shutil.rmtree(own, ignore_errors=True)


@pytest.fixture()
def postgres_url(postgres_server):
    """A fresh database on the server for one test, dropped afterwards."""
    import psycopg2

    name = f"fourfold_{uuid.uuid4().hex[:12]}"
    admin = psycopg2.connect(postgres_server)
    admin.autocommit = True
    admin.cursor().execute(f"create database {name}")
    try:
        yield postgres_server.rsplit("/", 1)[0] + f"/{name}"
    finally:
        admin.cursor().execute(f"drop database if exists {name} with (force)")
        admin.close()


