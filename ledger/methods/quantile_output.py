"""Quantile forecasts from the reference methods' predictive distributions.

Every reference method's interval at level L is central: [lower_L, upper_L] holds the
(1 - L/100)/2 and (1 + L/100)/2 quantiles of its predictive distribution (normal for the naive
family, ETS and Theta; mapped through the re-seasonalisation for naive2 and Theta, which keeps
quantiles because it is increasing; the member average for shd, an approximation stated in
:mod:`ledger.methods.forecasters`). So the tau quantile is the lower bound of level
100(1 - 2 tau) for tau < 0.5, the upper bound of level 100(2 tau - 1) for tau > 0.5, and the
point forecast (the distribution's median) for tau = 0.5.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from ..errors import UnknownName
from ..stats.quantiles import TAU_DIGITS
from ..wording import quantile_name

__all__ = ["check_quantiles", "levels_with_quantiles", "add_quantiles"]


def check_quantiles(quantiles: Sequence[float]) -> tuple[float, ...]:
    """Sorted, distinct levels strictly inside (0, 1); UnknownName otherwise."""
    out = sorted({round(float(t), TAU_DIGITS) for t in quantiles})
    bad = [t for t in out if not 0.0 < t < 1.0]
    if bad:
        raise UnknownName(f"backtest: quantile level {bad[0]:g} is outside (0, 1); use e.g. 0.05,0.1,…,0.95")
    return tuple(out)


def _level_of(tau: float) -> float:
    return round(100.0 * abs(1.0 - 2.0 * tau), TAU_DIGITS)


def levels_with_quantiles(levels: Sequence[float], quantiles: Sequence[float]) -> tuple[float, ...]:
    """The interval levels a method must compute: the requested ones and those the quantiles need."""
    extra = {_level_of(t) for t in quantiles if t != 0.5}
    return tuple(sorted(set(float(lv) for lv in levels) | extra))


def add_quantiles(out: Mapping[str, np.ndarray], levels: Sequence[float], quantiles: Sequence[float],
                  level_name) -> dict[str, np.ndarray]:
    """``out`` (forecast and bounds) with a ``q<NN>`` column per quantile, keeping only the bounds
    of the requested ``levels``; ``level_name`` spells a level as the bound columns do."""
    result = {"forecast": out["forecast"]}
    for level in levels:
        name = level_name(level)
        result[f"lower_{name}"] = out[f"lower_{name}"]
        result[f"upper_{name}"] = out[f"upper_{name}"]
    for tau in quantiles:
        if tau == 0.5:
            result[quantile_name(tau)] = out["forecast"]
            continue
        side = "lower" if tau < 0.5 else "upper"
        result[quantile_name(tau)] = out[f"{side}_{level_name(_level_of(tau))}"]
    return result
