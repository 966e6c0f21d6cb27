"""Run the fault-injection suite (tests/test_faults.py) and print its matrix: exit code, report, leftovers.

    python benchmarks/fault_matrix.py [-n 2]

One row per cell (fault x -j x drive path): the run's exit code (negative: killed by that signal),
seconds from the fault to the run's exit, each case's status in report.json ("-" when there is no
report, as after a SIGKILL of the run) and the processes of the run still alive afterwards.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def main(argv: list[str]) -> int:
    with tempfile.TemporaryDirectory() as tmp:
        rows_file = Path(tmp) / "rows.jsonl"
        env = {**os.environ, "VKIT_FAULT_MATRIX": str(rows_file)}
        done = subprocess.run([sys.executable, "-m", "pytest", "-q", "tests/test_faults.py", *argv], cwd=REPO, env=env)
        rows = [json.loads(line) for line in rows_file.read_text().splitlines()] if rows_file.exists() else []
    rows.sort(key=lambda r: (r["path"], r["jobs"], r["fault"]))
    print(f"{'path':7} {'-j':>2} {'fault':8} {'exit':>5} {'exit s':>6}  {'report (ok case, hung case)':30} leftover")
    for r in rows:
        rep = "-" if r["report"] is None else ", ".join(f"{k}={v}" for k, v in sorted(r["report"].items()))
        print(f"{r['path']:7} {r['jobs']:>2} {r['fault']:8} {r['exit']:>5} {r['exit_s']:>6}  {rep:30} {r['leftover']}")
    return done.returncode


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
