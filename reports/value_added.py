"""Forecast value added (FVA): how much each forecasting step improves on the one before it.

A step compares a model with a reference on their common cells (same series, target period and
horizon, both with a scale): every model against the benchmark (the ``--benchmark`` model, or
else a seasonal-naive reference in the ledger), and each declared override against the model it
adjusts (``--adjusts planner-override=incumbent-hw``, or else the relation recorded in the ledger
with ``backsight adjusts``: :mod:`ledger.overrides`).

    FVA = 100 · (1 − MASE_model / MASE_reference)     (percent; on common cells)

Orientation: positive means the step adds value (lower scaled error than its reference),
negative means it makes the forecast worse. MASE rather than MAPE keeps series of every size
and zero actuals in the comparison. The idea of measuring each step of a forecasting process
against a naive forecast is Gilliland's (M. Gilliland, 2010, *The Business Forecasting Deal*,
Wiley; from memory).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterable, Mapping, Sequence

import pandas as pd

from ledger.errors import UnknownName
from ledger.overrides import parse_overrides  # noqa: F401  (the one parser of OVERRIDE=BASE, re-exported)

__all__ = ["SEASONAL_NAIVE_NAMES", "FvaRow", "default_benchmark", "fva_steps", "fva_rows", "parse_overrides",
           "check_overrides"]

#: Model names taken as a seasonal-naive benchmark when no --benchmark is given.
SEASONAL_NAIVE_NAMES = ("seasonal-naive", "snaive", "ref-snaive")
_KEYS = ["series", "period_index", "horizon"]


@dataclasses.dataclass(frozen=True)
class FvaRow:
    model: str
    reference: str
    step: str            # "against the benchmark" or "override of its base"
    n: int
    mase_model: float
    mase_reference: float
    fva: float           # percent; positive = adds value


def default_benchmark(models: Sequence[str], benchmark: str | None) -> str | None:
    """``benchmark`` when given, else the first seasonal-naive model present, else None."""
    if benchmark:
        return benchmark
    return next((m for m in SEASONAL_NAIVE_NAMES if m in models), None)


def check_overrides(overrides: Mapping[str, str], models: Sequence[str]) -> None:
    """Raise :class:`UnknownName` when an override or its base has no scored run."""
    for name in [n for pair in overrides.items() for n in pair]:
        if name not in models:
            raise UnknownName(f"--adjusts: {name!r} has no scored run in the ledger; models: {', '.join(models) or 'none'}")


def fva_steps(cells: pd.DataFrame, models: Sequence[str], benchmark: str | None,
              overrides: Mapping[str, str]) -> pd.DataFrame:
    """Sums for every step, per horizon: model, reference, step, horizon, n, sum_model, sum_reference
    (sums of |e|/q over the common scaled cells), from the scored cells of all models."""
    columns = ["model", "reference", "step", "horizon", "n", "sum_model", "sum_reference"]
    scaled = cells[cells["q"].notna() & (cells["q"] > 0)]
    loss = scaled.assign(loss=scaled["e"].abs() / scaled["q"])[["model", *_KEYS, "loss"]]
    steps = [(m, benchmark, "against the benchmark") for m in models if benchmark and m != benchmark]
    steps += [(o, b, "override of its base") for o, b in overrides.items()]
    parts = []
    for model, ref, step in steps:
        a = loss[loss["model"] == model].drop(columns="model")
        b = loss[loss["model"] == ref].drop(columns="model")
        both = a.merge(b, on=_KEYS, suffixes=("_m", "_r"))
        if both.empty:
            continue
        g = both.groupby("horizon", sort=True).agg(n=("loss_m", "size"), sum_model=("loss_m", "sum"),
                                                   sum_reference=("loss_r", "sum")).reset_index()
        parts.append(g.assign(model=model, reference=ref, step=step))
    if not parts:
        return pd.DataFrame(columns=columns)
    return pd.concat(parts, ignore_index=True)[columns]


def fva_rows(steps: pd.DataFrame, horizons: Sequence[int] | None = None) -> list[FvaRow]:
    """One row per step, pooled over ``horizons`` (None: all), in the order of ``steps``."""
    part = steps if horizons is None else steps[steps["horizon"].isin(list(horizons))]
    rows = []
    for (model, ref, step), g in part.groupby(["model", "reference", "step"], sort=False):
        n = int(g["n"].sum())
        m, r = float(g["sum_model"].sum()) / n, float(g["sum_reference"].sum()) / n
        rows.append(FvaRow(str(model), str(ref), str(step), n, m, r, 100 * (1 - m / r) if r > 0 else math.nan))
    return rows
