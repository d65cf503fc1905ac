"""Shared test helpers: the command line as a user runs it (a real subprocess), and small study recipes."""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

# The fault catalogue's shared fixtures (a finished study folder to break): tests/faults/faultkit.py; the
# PostgreSQL server and a fresh database per test: tests/pgserver.py.
pytest_plugins = ["faults.faultkit", "pgserver"]


def run_fourfold(*args, env=None, **kwargs) -> subprocess.CompletedProcess:
    """`fourfold ARGS…` in a subprocess of this interpreter, one BLAS/OpenMP thread unless ``env`` says
    otherwise; text output captured."""
    return subprocess.run([sys.executable, "-m", "fourfold.cli", *args], capture_output=True, text=True,
                          env={**os.environ, "OMP_NUM_THREADS": "1", **(env or {})}, **kwargs)


@pytest.fixture(scope="session")
def fourfold_cli():
    """The command line as a callable: ``fourfold_cli("run", recipe, "--out", folder)``."""
    return run_fourfold
