"""Which columns a table shows: the compact default set of ``scores`` and ``--metrics``.

Only the table is trimmed; csv and json carry every column unless ``--metrics`` names some.
"""

from __future__ import annotations

from collections.abc import Sequence

from ..lazy import pandas as pd

from ..errors import UnknownName
from ..scoring.selection import unknown_message

__all__ = ["COMPACT", "choose_columns"]

# The figures a monthly review reads first; the first interval level's coverage (and its n) is added.
COMPACT = ("n", "mae", "mape", "mase", "bias_pct", "forecast_of", "wmape", "wmase", "n_left_out")


def choose_columns(frame: pd.DataFrame, keys: Sequence[str], metrics: str | None, *,
                   compact: bool) -> pd.DataFrame:
    """``frame`` with its key columns and the chosen metrics, in the frame's order.

    ``metrics``: None (the compact set when ``compact``, else every column), "all", or a comma
    list of column names (an unknown one is an error naming the nearest).
    """
    if metrics is not None and metrics.strip().lower() == "all" or (metrics is None and not compact):
        return frame
    metric_cols = [c for c in frame.columns if c not in keys]
    if metrics is None:
        levels = [c for c in metric_cols if c.startswith("coverage_")]
        wanted = set(COMPACT) | ({levels[0], "n_" + levels[0].split("_", 1)[1]} if levels else set())
    else:
        wanted = {m.strip().lower() for m in metrics.split(",") if m.strip()}
        unknown = sorted(wanted - set(metric_cols))
        if unknown:
            raise UnknownName("--metrics: " + unknown_message("metric", "metrics", unknown, metric_cols)
                              + " (or --metrics all)")
    return frame[[c for c in frame.columns if c in keys or c in wanted]]
