"""Thread limits for one calculation: every BLAS and OpenMP pool in the process, restored afterwards.

threadpoolctl finds the pools by the libraries loaded in the process (numpy's and scipy's OpenBLAS,
PySCF's own OpenBLAS and libgomp, the system libgomp tblite links against), whatever BLAS build they
are, and sets them through each library's own API; it neither reads nor writes environment variables.
A library loaded only after the limit was set keeps its own count, so the engines import theirs first.
"""

from __future__ import annotations

import contextlib
import sys
from functools import cache

# Modules whose import loads a thread pool of its own (PySCF: its OpenBLAS and libgomp; tblite: libgomp).
ENGINE_MODULES = ("pyscf.lib", "tblite.interface")


@cache
def _controller(loaded: tuple[bool, ...]):
    # Scanning the process's libraries costs 1.8 ms (measured), as much as a small GFN2-xTB SCC; one scan
    # per set of loaded engines keeps the limit cheap enough to set around every call.
    from threadpoolctl import ThreadpoolController

    return ThreadpoolController()


@contextlib.contextmanager
def thread_limits(threads: int):
    """Every loaded BLAS and OpenMP pool runs ``threads`` threads inside the block; the previous counts
    come back on exit (also on an exception). ``os.environ`` is not touched."""
    controller = _controller(tuple(name in sys.modules for name in ENGINE_MODULES))
    with controller.limit(limits=int(threads)):
        yield


@contextlib.contextmanager
def pyscf_threads(threads: int):
    """``thread_limits`` plus PySCF's own OpenMP count (``pyscf.lib.num_threads``), both restored on exit.

    PySCF is imported first so that its libraries are among those limited.
    """
    from pyscf import lib

    with lib.with_omp_threads(int(threads)), thread_limits(threads):
        yield
