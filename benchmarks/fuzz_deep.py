"""Deep contract fuzzing of every operation in openapi.yaml (opt-in; the normal suite runs a bounded pass).

Runs tests/service/test_contract_fuzz.py with ``HEATPATH_DEEP_FUZZ=1`` (random seeds, many more
generated requests per operation) and prints the number of requests made per operation, the
total, the failing calls and the distinct failures found, and the wall time.

    .venv/bin/python benchmarks/fuzz_deep.py [--examples 300] [--show 5]

Exit status: 0 when no failure was found, 1 otherwise.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]


def main() -> int:
    parser = argparse.ArgumentParser(description="Deep property-based fuzzing of the HTTP contract.")
    parser.add_argument("--examples", type=int, default=300,
                        help="generated requests per operation, valid and invalid together (default 300)")
    parser.add_argument("--show", type=int, default=5, help="distinct failures to print in full (default 5)")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        report_path = Path(tmp) / "report.json"
        env = {**os.environ, "HEATPATH_DEEP_FUZZ": "1", "HEATPATH_FUZZ_EXAMPLES": str(args.examples),
               "HEATPATH_FUZZ_REPORT": str(report_path)}
        started = time.perf_counter()
        run = subprocess.run([sys.executable, "-m", "pytest", "tests/service/test_contract_fuzz.py", "-q",
                              "-p", "no:cacheprovider", "--no-header", "-rN"], cwd=REPO, env=env,
                             capture_output=True, text=True, check=False)
        wall = time.perf_counter() - started
        if not report_path.exists():
            print(run.stdout[-4000:], run.stderr[-4000:], sep="\n")
            print("the fuzz run wrote no report", file=sys.stderr)
            return 1
        report = json.loads(report_path.read_text())
    requests = report["requests"]
    width = max(map(len, requests), default=10)
    print(f"contract fuzzing: up to {args.examples} generated requests per operation (fewer where the inputs run "
          "out), plus the document's examples and boundary cases; random seeds\n")
    for label, n in sorted(requests.items()):
        failing = report["failing_calls"].get(label, 0)
        statuses = {k.rsplit(" -> ", 1)[1]: v for k, v in report["statuses"].items() if k.rsplit(" -> ", 1)[0] == label}
        answers = ", ".join(f"{code}: {count}" for code, count in sorted(statuses.items()))
        print(f"  {label:<{width}}  {n:6d} requests  ({answers})" + (f"  {failing} failing" if failing else ""))
    distinct = {(f["run"], f["operation"], f["failure"].splitlines()[0] if f["failure"] else "") for f in
                report["failures"]}
    print(f"\nrequests made:     {sum(requests.values())}")
    print(f"failing calls:     {sum(report['failing_calls'].values())} (hypothesis replays a failure while shrinking)")
    print(f"distinct failures: {len(distinct)}")
    print(f"wall time:         {wall:.1f} s")
    for failure in report["failures"][:args.show]:
        print(f"\n--- {failure['run']}: {failure['operation']}\n{failure['failure']}")
    return 0 if not distinct and run.returncode == 0 else 1


if __name__ == "__main__":
    sys.exit(main())
