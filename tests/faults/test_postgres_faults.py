"""The PostgreSQL store when the server goes away mid-run, and its password everywhere fourfold writes.

The server is the one `.ci/run` starts (FOURFOLD_TEST_POSTGRES); without it these tests skip. Between
fourfold and the server sits a TCP relay of the test's own, which the test cuts and restores: the
connection is lost the way a network or a server restart loses it, on real sockets.
"""

from __future__ import annotations

import json
import socket
import threading
import time
from urllib.parse import urlsplit

import pytest
from faultkit import ZINC_JOBS, check_kept, fault, fourfold, one_line, recipe_file, start, wait_until

PASSWORD = "Pa55-w0rd_never-shown"  # the server trusts every local user: any password connects
FAST_RETRIES = {"FOURFOLD_STORE_RETRY_S": "0.5,1,1,2"}  # the store's test hook: 4.5 s of tries instead of 31


@pytest.fixture()
def database(postgres_url):
    """The fresh database of tests/pgserver.py as (host, port, name, user)."""
    parts = urlsplit(postgres_url)
    return parts.hostname, parts.port, parts.path.lstrip("/"), parts.username


class Relay:
    """A TCP relay on 127.0.0.1 to the server; ``cut()`` closes it and every connection through it, ``restore()``
    listens again on the same port."""

    def __init__(self, host: str, port: int):
        self.target = (host, port)
        self.port = None
        self._sockets, self._listener, self._lock = [], None, threading.Lock()
        self.restore()

    def restore(self) -> None:
        listener = socket.socket()
        listener.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        listener.bind(("127.0.0.1", self.port or 0))
        listener.listen(16)
        self.port = listener.getsockname()[1]
        self._listener = listener
        threading.Thread(target=self._accept, args=(listener,), daemon=True).start()

    def _accept(self, listener) -> None:
        while True:
            try:
                client, _ = listener.accept()
            except OSError:
                return
            server = socket.create_connection(self.target)
            with self._lock:
                self._sockets += [client, server]
            for a, b in ((client, server), (server, client)):
                threading.Thread(target=self._pump, args=(a, b), daemon=True).start()

    @staticmethod
    def _pump(source, sink) -> None:
        try:
            while data := source.recv(65536):
                sink.sendall(data)
        except OSError:
            pass
        for end in (source, sink):
            try:
                end.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass

    def cut(self) -> None:
        self._listener.close()
        with self._lock:
            for end in self._sockets:
                try:
                    end.shutdown(socket.SHUT_RDWR)
                except OSError:
                    pass
                end.close()
            self._sockets.clear()


def _url(user, host, port, name, password=PASSWORD) -> str:
    return f"postgresql://{user}:{password}@{host}:{port}/{name}"


def _rows(url) -> dict:
    from fourfold.study.store import ResultStore

    return ResultStore(url).status()


def _records(folder) -> dict:
    from fourfold.study.records import RecordShelf

    records, _ = RecordShelf(folder).read()
    return {r.job.key: r.result["status"] for r in records}


def _running(folder) -> bool:
    path = folder / "running.json"
    try:
        return bool(json.loads(path.read_text())["running"])
    except (OSError, ValueError, KeyError):
        return False


def test_a_connection_lost_mid_run_is_retried_and_nothing_is_lost(database, tmp_path):
    host, port, name, user = database
    relay = Relay(host, port)
    url = _url(user, "127.0.0.1", relay.port, name)
    folder = tmp_path / "pg"
    driver = start("run", recipe_file(tmp_path), "--out", folder, "--quiet", "--store", url, extra_env=FAST_RETRIES)
    try:
        wait_until(lambda: _running(folder), 300, "jobs running", driver)
        relay.cut()  # the jobs finish while the server is out of reach
        fault("PostgreSQL connection lost mid-run, back after 2 s")
        time.sleep(2.0)
        relay.restore()
        out, err = driver.communicate(timeout=300)
    finally:
        relay.cut()
        if driver.poll() is None:
            driver.kill()
    assert driver.returncode == 0, err
    assert "Traceback" not in out + err
    assert len(_rows(_url(user, host, port, name))) == ZINC_JOBS
    check_kept(_records(folder), _rows(_url(user, host, port, name)), "PostgreSQL connection lost and back")


def test_a_server_gone_for_good_is_one_line_and_the_next_run_stores_what_finished(database, tmp_path):
    host, port, name, user = database
    relay = Relay(host, port)
    folder = tmp_path / "pg"
    recipe = recipe_file(tmp_path)
    driver = start("run", recipe, "--out", folder, "--quiet", "--store", _url(user, "127.0.0.1", relay.port, name),
                   extra_env=FAST_RETRIES)
    try:
        wait_until(lambda: _running(folder), 300, "jobs running", driver)
        relay.cut()
        fault("PostgreSQL server gone for good mid-run")
        out, err = driver.communicate(timeout=300)
    finally:
        relay.cut()
        if driver.poll() is None:
            driver.kill()
    assert "Traceback" not in out + err
    assert driver.returncode == 1, err
    line = one_line(err[err.index("error:"):])
    assert "lost the PostgreSQL store" in line and "records/" in line and PASSWORD not in err
    finished = _records(folder)
    assert finished  # the job that ended while the server was gone is on disk
    direct = _url(user, host, port, name)
    rerun = fourfold("run", recipe, "--out", folder, "--quiet", "--store", direct, what="run after the server is back")
    assert rerun.returncode == 0, rerun.stderr
    check_kept(finished, _rows(direct), "results kept on disk while PostgreSQL was gone")
    assert f"{ZINC_JOBS - len(finished)} run now" in rerun.stdout  # the kept ones were not computed again


def test_the_password_appears_in_no_output_file_or_log(database, tmp_path):
    host, port, name, user = database
    url = _url(user, host, port, name)
    folder = tmp_path / "pg"
    outputs = [fourfold("run", recipe_file(tmp_path), "--out", folder, "--quiet", "--store", url, what="run with a "
                        "password in the URL")]
    outputs.append(fourfold("status", folder, "--store", url, what="status with a password"))
    outputs.append(fourfold("rebuild", folder, "--store", url, what="rebuild with a password"))
    # and every way the URL can be wrong: unreachable port, unknown database, the password in a parameter
    for bad in (_url(user, host, 1, name), _url(user, host, port, "no_such_db"),
                f"postgresql://{user}@{host}:1/{name}?password={PASSWORD}",
                _url(user, host, port, name, PASSWORD + "@x")):
        outputs.append(fourfold("status", folder, "--store", bad, what="status on a bad PostgreSQL URL"))
        fault("a PostgreSQL URL that cannot connect")
    assert outputs[0].returncode == 0 and all(r.returncode == 2 for r in outputs[3:]), [r.stderr for r in outputs]
    texts = [r.stdout + r.stderr for r in outputs]
    texts += [p.read_text(errors="replace") for p in folder.rglob("*") if p.is_file() and p.suffix != ".png"]
    assert any("versions.json" == p.name for p in folder.iterdir())
    leaks = [t[:200] for t in texts if PASSWORD in t or "x@" + host in t]  # nor the part after an unescaped '@'
    assert not leaks, leaks


@pytest.mark.slow
def test_a_stop_while_the_server_is_away_ends_the_retries(database, tmp_path):
    """Ctrl-C while the store waits for the server: the retries end at once, the results stay in records/."""
    import signal

    from faultkit import Watched

    host, port, name, user = database
    relay = Relay(host, port)
    folder, recipe = tmp_path / "pg", recipe_file(tmp_path)
    run = Watched("run", recipe, "--out", folder, "--quiet", "--store", _url(user, "127.0.0.1", relay.port, name))
    try:
        wait_until(lambda: _running(folder), 300, "jobs running", run.process)
        relay.cut()
        wait_until(lambda: _records(folder), 300, "a job kept on disk while the server is away", run.process)
        run.signal_group(signal.SIGINT)
        fault("Ctrl-C while the PostgreSQL store is retried")
        out, err = run.finish()
    finally:
        relay.cut()
        run.left_alive()
    assert "Traceback" not in out + err
    assert run.process.returncode == 130 and "stopped by SIGINT" in err, err
    finished = _records(folder)
    direct = _url(user, host, port, name)
    rerun = fourfold("run", recipe, "--out", folder, "--quiet", "--store", direct, what="run after a stopped retry")
    assert rerun.returncode == 0, rerun.stderr
    check_kept(finished, _rows(direct), "a stop during the store's retries")
