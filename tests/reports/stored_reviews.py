"""Two stored reviews written by hand into an invented report ledger, so that its report has
changes to show: which findings are new, resolved and persisting, and whose MASE moved.

Written straight into the review tables (as ``tests/cycle/test_review.py`` does) so that the
figures then and now are known to the test; the as-ofs are before the report's.
"""

from __future__ import annotations

import datetime as dt

from ledger import Ledger

MODELS = ("incumbent-hw", "challenger-ets", "snaive")
#: key -> (severity, figure) in review 1 and review 2 (None: not in that review)
FINDINGS = {
    "drift|incumbent-hw|North/Hoses||": (("act", 2.5), None),                   # resolved
    "calibration|incumbent-hw||80|all": (("watch", 71.0), ("act", 64.0)),       # persisting, severity changed
    "value|challenger-ets|||": (("watch", -3.0), ("watch", -4.0)),             # persisting, unchanged
    "drift|challenger-ets|South/Valves||": (None, ("act", 3.1)),                # new
    "drift|snaive|North/Pumps||": (None, ("watch", 1.7)),                       # new
    "calibration|challenger-ets||95|all": (None, ("watch", 89.0)),             # new
    "data|snaive|South/Hoses||": (None, ("act", 4.0)),                          # new
    "drift|incumbent-hw|South/Pumps||": (None, ("watch", 1.2)),                 # new: fifth, below the first screen
}
#: model -> MASE in review 1 and review 2 (n cells 300 then 330)
MASE = {"incumbent-hw": (0.80, 0.97), "challenger-ets": (0.78, 0.79), "snaive": (1.00, 1.31)}


def store_reviews(path) -> None:
    with Ledger.open(path) as book:
        con = book.store.con
        for review in (1, 2):
            con.execute("INSERT INTO reviews VALUES (?, ?, 'invented', 'inbox', 0, 0, 0)",
                        [review, dt.datetime(2030, review, 1)])
            for pos, (key, states) in enumerate(FINDINGS.items()):
                state = states[review - 1]
                if state is None:
                    continue
                kind, model, series, level, _ = key.split("|")
                con.execute("INSERT INTO review_findings VALUES (?, ?, ?, ?, ?, ?, ?, ?, '2026-01', ?, 'invented')",
                            [review, pos, key, kind, model, series, float(level) if level else None, *state])
            for model, values in MASE.items():
                con.execute("INSERT INTO review_models VALUES (?, ?, ?, ?, 12)",
                            [review, model, values[review - 1], 300 + 30 * (review - 1)])
