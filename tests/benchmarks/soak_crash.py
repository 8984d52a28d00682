"""Soak: many SIGKILLed imports into one ledger; prints how many were killed mid-write and what was lost.

    python tests/benchmarks/soak_crash.py [--trials 200] [--seed 1] [--max-delay 0.6] [--keep DIR]

Each trial starts a large snapshot or actuals import in a child process and kills it at a random
moment; afterwards the ledger must open, `verify` must pass, earlier content must be unchanged and
the killed import must be there whole or not at all (the checks of tests/core/test_crash_safety.py).
"""

from __future__ import annotations

import argparse
import random
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from tests.core.test_crash_safety import check_after, run_trial, snapshot_state  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--trials", type=int, default=200)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--max-delay", type=float, default=0.6)
    parser.add_argument("--keep", type=Path, default=None)
    args = parser.parse_args()
    folder = args.keep or Path(tempfile.mkdtemp(prefix="soak-crash-"))
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "soak.duckdb"
    rng = random.Random(args.seed)
    outcomes = {"whole": 0, "absent": 0}
    start = time.perf_counter()
    for trial in range(args.trials):
        kind = "snapshot" if trial % 2 == 0 else "actuals"
        before = snapshot_state(path) if path.exists() else {"runs": [], "actuals": 0}
        finished = run_trial(path, kind, 10_000 + trial, rng.uniform(0.0, args.max_delay))
        outcome = check_after(path, kind, 10_000 + trial, before)
        if finished and outcome != "whole":
            raise SystemExit(f"trial {trial}: the child finished but its import is not whole")
        outcomes[outcome] += 1
    print(f"{args.trials} trials in {time.perf_counter() - start:.0f} s: {outcomes['absent']} imports killed "
          f"before commit (absent, as required), {outcomes['whole']} complete; verify passed after every "
          f"kill; nothing else lost. Ledger: {path}")


if __name__ == "__main__":
    main()
