"""One job in a process of its own: the body that runs it and the driver-side helpers around it.

Both executors (the local pool in fourfold.study.runner, Dask in fourfold.study.cluster) start each job in a
process of its own and call ``job_process_body`` there: the job's output goes to its log, its thread
count is limited inside the process (the caller's environment is never changed), and any exception becomes
a failed result with a one-line reason. The driver side turns a dead process into a reason
(``exit_reason``) and gives a failure without a structure the job's start geometry (``complete_failure``).
"""

from __future__ import annotations

import os
import signal
import time
from datetime import UTC, datetime
from pathlib import Path

from ..chem.notation import formula_slug
from ..errors import describe_os_error

# Test hook: FOURFOLD_FAULT="raise:TEXT" / "exit:TEXT" / "hang:TEXT" / "memory:TEXT" makes the job whose label
# contains TEXT raise, end its process abruptly, hang, or run with almost no memory left (its address space
# capped 1 MiB above what it has mapped at the start), so the reliability tests exercise real processes.
FAULT_ENV = "FOURFOLD_FAULT"
_FAULT_MEMORY_BYTES = 2**20


def _inject_fault(label: str) -> None:
    for item in filter(None, os.environ.get(FAULT_ENV, "").split(",")):
        mode, _, text = item.partition(":")
        if text and text in label:
            if mode == "raise":
                raise RuntimeError(f"injected failure for {label}")
            if mode == "exit":
                os._exit(3)
            if mode == "hang":
                time.sleep(10_000)
            if mode == "memory":
                _cap_memory(_FAULT_MEMORY_BYTES)


def _cap_memory(extra_bytes: int) -> None:
    import resource

    with open("/proc/self/status", encoding="ascii") as status:
        mapped = next(int(line.split()[1]) * 1024 for line in status if line.startswith("VmSize:"))
    resource.setrlimit(resource.RLIMIT_AS, (mapped + extra_bytes, mapped + extra_bytes))


def die_with_parent(parent: int) -> None:
    """SIGKILL this process when its parent dies (Linux), so a job never outlives the process that started it
    (a Dask worker, or the local pool's fork server, which ends with the driver). Armed in the child itself:
    forking with a hook in a threaded parent can deadlock."""
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGKILL)  # 1 = PR_SET_PDEATHSIG
    except (OSError, AttributeError):
        return
    if os.getppid() != parent:  # the parent died before the signal was armed
        os._exit(1)


def local_job_main(job, parent: dict | None, log_path: str, chk_path: str | None, threads: int, conn) -> None:
    """Body of a local pool's job process, forked from the fork server."""
    from .stopping import job_process_signals

    die_with_parent(os.getppid())
    job_process_signals()
    job_process_body(job, parent, log_path, chk_path, threads, conn)


def job_paths(out_dir: Path, job) -> tuple[str, str | None]:
    """Per-job log file, named for the state and task, and the orbital file of a DFT job (xTB keeps none)."""
    s = job.spec
    state = "_".join(str(p) for p in (
        formula_slug(s.formula), s.arrangement if not s.is_path_point else f"path{s.trans_angle_deg:.1f}", s.isomer,
        f"2S{s.spin2s}", s.kind, job.task, s.method) if p != "")
    log_path = str(out_dir / "logs" / f"{state}_{job.key[:8]}.log")
    chk_path = str(out_dir / "scratch" / f"{job.key[:16]}.chk") if s.method != "xtb" else None
    return log_path, chk_path


def _log_header(job, threads: int) -> str:
    from .jobs import code_versions

    s = job.spec
    engine = ", ".join(f"{k}={v}" for k, v in sorted(s.engine.items()) if v is not None)
    versions = ", ".join(f"{k} {v}" for k, v in code_versions().items())
    return (f"# fourfold job: {job.label}\n# task: {job.task}; charge {s.charge:+d}; 2S = {s.spin2s}\n"
            f"# engine: {engine}\n# job key: {job.key}\n# parent: {job.parent or 'none'}\n"
            f"# started: {datetime.now(UTC).isoformat(timespec='seconds')}; threads {threads}\n"
            f"# versions: {versions}\n")


def job_process_body(job, parent: dict | None, log_path: str, chk_path: str | None, threads: int, conn) -> None:
    """Run ``job`` in this (fresh) process and send its result through ``conn``."""
    try:
        log = os.open(log_path, os.O_WRONLY | os.O_CREAT | os.O_APPEND, 0o644)
        os.write(log, _log_header(job, threads).encode())
    except OSError as error:  # a full disk or a folder turned read-only: a failure with its reason, no traceback
        conn.send({"status": "failed", "reason": f"cannot write the job's log ({describe_os_error(error)})"})
        conn.close()
        return
    os.dup2(log, 1)
    os.dup2(log, 2)
    try:
        _inject_fault(job.label)
        from ..compute.tasks import JobContext, run_task
        from ..compute.threads import thread_limits

        context = JobContext(log_path=log_path, chk_path=chk_path, threads=threads,
                             guess=parent.get("chkfile") if parent else None)
        with thread_limits(threads):
            result = run_task(job.task, job.spec, parent, context)
    except MemoryError:
        result = {"status": "failed", "reason": "MemoryError: the job ran out of memory; give it more, or run fewer "
                                                "--workers side by side"}
    except Exception as error:  # a failed job is a result; the driver records it
        first = str(error).strip().splitlines()[0] if str(error).strip() else type(error).__name__
        result = {"status": "failed", "reason": f"{type(error).__name__}: {first}"}
    conn.send(result)
    conn.close()


def exit_reason(exitcode: int | None, log_path: str | None = None) -> str:
    """Why a job process ended without a result, from its exit status, with the last line its log holds (a
    library that gives up, e.g. on memory, says why there before it ends the process)."""
    if exitcode is None:
        reason = "worker vanished"
    elif exitcode < 0:
        name = signal.Signals(-exitcode).name
        hint = {"SIGKILL": " (killed: out of memory or by hand)", "SIGSEGV": " (segmentation fault)"}.get(name, "")
        reason = f"worker died from {name}{hint}"
    else:
        reason = f"worker exited with status {exitcode} before returning a result"
    last = _last_log_line(log_path) if log_path else ""
    return f"{reason}; its log ends: {last}" if last else reason


def _last_log_line(log_path: str, limit: int = 200) -> str:
    """The last line of a job's log that is not its header, without terminal colour codes, shortened."""
    import re

    try:
        with open(log_path, "rb") as log:
            log.seek(max(0, os.fstat(log.fileno()).st_size - 4096))
            tail = log.read().decode("utf-8", "replace")
    except OSError:
        return ""
    lines = [re.sub(r"\x1b\[[0-9;]*m", "", line).strip() for line in tail.splitlines()]
    lines = [line for line in lines if line and not line.startswith("# ")]
    text = lines[-1] if lines else ""
    return text if len(text) <= limit else text[: limit - 1] + "…"


def failed_result(job, reason: str, parent: dict | None) -> dict:
    """A failure row: keeps the job's start geometry so the store has a structure to show."""
    from ..compute.tasks import start_structure

    try:
        _, atoms = start_structure(job.spec, parent if parent and parent.get("status") == "done" else None)
        symbols, positions = atoms.get_chemical_symbols(), atoms.get_positions().tolist()
    except Exception:  # the spec itself is broken: still record the failure
        symbols, positions = ["X"], [[0.0, 0.0, 0.0]]
    return {"status": "failed", "reason": reason, "symbols": symbols, "positions_angstrom": positions, "converged": False}


def complete_failure(job, result: dict, parent: dict | None) -> dict:
    """A failure without a structure gets the job's start geometry, so every stored row has one."""
    if result.get("status") == "failed" and "symbols" not in result:
        return {**failed_result(job, result.get("reason", "unknown"), parent), **result}
    return result
