"""Child process for the crash tests: one large import into a ledger, then exit.

    python import_child.py LEDGER KIND ROWS SEED      (KIND: snapshot | actuals)

Prints "start" once the ledger is open (so the parent knows the write is under way) and
"done" after the import committed.
"""

import sys

import numpy as np
import pandas as pd

from ledger import Ledger


def frame(kind: str, rows: int, seed: int) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    n_series = max(1, rows // 12)
    series = np.repeat([f"s{seed}-{i}" for i in range(n_series)], 12)
    periods = np.tile([f"2027-{m:02d}" for m in range(1, 13)], n_series)
    values = rng.uniform(1, 100, len(series)).round(3)
    if kind == "actuals":
        return pd.DataFrame({"series": series, "period": periods, "actual": values})
    return pd.DataFrame({"series": series, "period": periods, "forecast": values,
                         "lower_80": values - 5, "upper_80": values + 5})


def main() -> None:
    path, kind, rows, seed = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4])
    data = frame(kind, rows, seed)
    with Ledger.open(path) as book:
        print("start", flush=True)
        if kind == "actuals":
            book.record_actuals(data, name=f"crash-{seed}.csv")
        else:
            book.snapshot(data, model=f"crash-{seed}", origin="2026-12", name=f"crash-{seed}.csv")
    print("done", flush=True)


if __name__ == "__main__":
    main()
