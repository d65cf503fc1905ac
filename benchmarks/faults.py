#!/usr/bin/env python
"""faults: the fault catalogue's totals — faults injected, bad inputs tried, tracebacks seen, results lost.

Run: ``benchmarks/faults.py [--examples 400] [--quick]`` from the repository (fourfold installed, or
PYTHONPATH=driver). It runs every test of tests/faults — the slow ones too unless --quick — on real
processes and files, with a ledger each test writes to as it injects a fault, tries a bad input, sees a
traceback or finds a finished result gone (tests/faults/faultkit.py), then prints the ledger's totals.
`--examples` sets how many inputs each property-based test generates. The PostgreSQL faults run when
FOURFOLD_TEST_POSTGRES names a server (`.ci/run` starts one), the full-disk and read-only ones as root.
Tracebacks seen and finished results lost must both be 0; the exit status is 1 otherwise.
"""

import argparse
import json
import os
import re
import subprocess
import sys
import tempfile
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--examples", type=int, default=400, help="inputs per property-based test (default 400)")
    parser.add_argument("--quick", action="store_true", help="leave out the tests marked slow")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="fourfold-faults-") as folder:
        ledger = Path(folder) / "ledger.jsonl"
        ledger.touch()
        env = {**os.environ, "FOURFOLD_FAULT_LEDGER": str(ledger), "FOURFOLD_FAULT_EXAMPLES": str(args.examples),
               "OMP_NUM_THREADS": "1"}
        marks = "not slow" if args.quick else "slow or not slow"
        tests = subprocess.run([sys.executable, "-m", "pytest", "tests/faults", "-m", marks, "-q", "-p",
                                "no:cacheprovider", "-rs"], cwd=ROOT, env=env, capture_output=True, text=True)
        entries = [json.loads(line) for line in ledger.read_text().splitlines() if line.strip()]
    totals, stops = Counter(), []
    for entry in entries:
        if entry["kind"] == "stop_seconds":
            stops.append(entry["count"])
        else:
            totals[entry["kind"]] += entry["count"]
    outcome = re.findall(r"(\d+) (passed|failed|skipped|deselected|error)", tests.stdout.strip().splitlines()[-1])
    for line in tests.stdout.splitlines():
        if line.startswith("SKIPPED"):
            print(line)
    if tests.returncode not in (0, 5):
        print(tests.stdout[-4000:])
    print(f"tests: {', '.join(f'{n} {what}' for n, what in outcome)}")
    if stops:
        median = sorted(stops)[len(stops) // 2]
        print(f"signals: {len(stops)} sent; stopped within {max(stops):.1f} s at most, {median:.1f} s median "
              "(signal to exit, as the test saw it)")
    print(f"faults injected: {totals['fault']}")
    print(f"bad inputs tried: {totals['bad_input']}")
    print(f"tracebacks seen: {totals['traceback']} (must be 0)")
    print(f"finished results lost: {totals['lost']} (must be 0)")
    sys.exit(1 if totals["traceback"] or totals["lost"] or tests.returncode not in (0, 5) else 0)


if __name__ == "__main__":
    main()
