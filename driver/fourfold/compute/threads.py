"""Thread counts of one calculation: BLAS and OpenMP pools limited, then restored.

threadpoolctl finds every BLAS and OpenMP runtime loaded in the process (numpy's OpenBLAS, tblite's and
PySCF's libgomp, an MKL build) and limits them for the duration; PySCF keeps its own OpenMP count, set
through its public ``lib.num_threads``. Nothing is written to the environment, so a caller's OMP/BLAS
variables are as they were after a run. Measured on the shared 2-core machine: a 9-atom GFN2-xTB SCC took
3–7 ms on one thread and 80–110 ms on two threads of a busy machine, and oversubscribed BLAS made xTB
relaxations 3× slower, so every job runs with exactly the threads it was given.
"""

from __future__ import annotations

import sys
from contextlib import contextmanager


@contextmanager
def limited_threads(threads: int):
    """Run the block with ``threads`` BLAS and OpenMP threads (PySCF's own count included)."""
    from threadpoolctl import threadpool_limits

    pyscf_lib = sys.modules.get("pyscf.lib")  # only when PySCF is already loaded: xTB jobs do not import it
    previous = pyscf_lib.num_threads() if pyscf_lib else None
    with threadpool_limits(limits=int(threads)):
        if pyscf_lib:
            pyscf_lib.num_threads(int(threads))
        try:
            yield
        finally:
            if pyscf_lib:
                pyscf_lib.num_threads(previous)
