"""Soak: the hostile-name property tests with many drawn examples; prints how many ran and passed.

    python tests/benchmarks/soak_names.py [--examples 100]

Runs tests/core/test_names_round_trip.py (the report, export and import) with
BACKSIGHT_NAME_EXAMPLES examples each (the default test run draws 2), and
tests/cli/test_hostile_names.py (tables, messages, CSV, JSON) as it is. A failure prints
hypothesis's smallest failing example.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--examples", type=int, default=100)
    args = parser.parse_args()
    env = dict(os.environ, BACKSIGHT_NAME_EXAMPLES=str(args.examples),
               PYTHONPATH=os.pathsep.join(p for p in (str(REPO), os.environ.get("PYTHONPATH", "")) if p))
    start = time.perf_counter()
    done = subprocess.run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider",
                           "tests/core/test_names_round_trip.py", "tests/cli/test_hostile_names.py",
                           "--hypothesis-show-statistics"], cwd=REPO, env=env)
    print(f"hostile-name soak with {args.examples} drawn examples per report/export test: "
          f"{'passed' if done.returncode == 0 else 'FAILED'} in {time.perf_counter() - start:.0f} s")
    raise SystemExit(done.returncode)


if __name__ == "__main__":
    main()
