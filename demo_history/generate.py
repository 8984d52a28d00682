"""Rebuild every data file of the invented Fernhollow Garden Supply scenario, deterministically.

    python demo_history/generate.py [--out DIR]

Writes ``actuals/``, ``runs/`` and ``manifest.csv`` into DIR (default: this script's folder).
Everything here is INVENTED: the company, its regions, its products and every number. See
README.md in this folder for the story, the sources and the planted problems.

How the forecasts are made (each origin uses only the actuals known when its run was made):

* ``incumbent-hw`` -- additive Holt-Winters, ETS(A,A,A). Its smoothing weights and initial states
  are re-estimated once a year, at each December origin, on a "stable" grid (alpha <= 0.1), then
  kept for the year;
  its level, trend and seasonal states are updated with every new actual. Its bands are printed
  with z = 1.0 for "80%" and z = 1.5 for "95%" (instead of 1.2816 and 1.96): the tool's intervals
  are too narrow by the factors 0.78 and 0.77.
* ``challenger-damped`` -- damped additive Holt-Winters, ETS(A,Ad,A), every weight (alpha, beta,
  gamma, phi) re-chosen at every origin from a wide grid; its own normal intervals, and
  quantiles q05 ... q95 whose tails are planted over-confident (``CHALLENGER_Q``).
* ``seasonal-naive`` -- ``ledger.methods.forecasters.forecast(method="snaive")`` with its standard intervals.
* ``planner-override`` -- the incumbent's point forecast raised by a noisy 8% (mean 0.08, sd 0.05
  per cell), rounded to whole units; no intervals.

The two Holt-Winters sources run the ETS recursions of Hyndman, Koehler, Ord & Snyder (2008),
*Forecasting with Exponential Smoothing*, Table 2.1 (additive error forms), vectorised over all
series and a grid of weights in one pass with numpy (fitting statsmodels' ``ETSModel`` some 1,700
times takes many minutes). The recursion is linear in the initial states, so for each grid point
they are estimated exactly by least squares; the weights with the smallest in-sample sum of
squared one-step errors (SSE) are then the Gaussian maximum-likelihood ones on the grid.
Forecast variances are the closed form for class-1 models (Hyndman et al. 2008, Table 6.1):
sigma^2 [1 + sum_{j<h} c_j^2], c_j = alpha + beta (phi + ... + phi^j) for j < m. The incumbent
takes sigma^2 = SSE / n, as statsmodels does; the challenger allows for its 17 estimated
parameters with Akaike's final prediction error, (SSE / n) (n + p) / (n - p). The test
tests/test_demo_history.py checks forecasts, SSE and bounds against statsmodels' ``ETSModel``
with the same weights and initial states.

All numbers are rounded (actuals to whole units, forecasts to 0.1) and written with a fixed
format and ``\\n`` line endings, so the output is byte-stable.
"""

from __future__ import annotations

import argparse
import calendar
import sys
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))  # this checkout's ledger package
from ledger.methods.forecasters import forecast as reference_forecast

SEED = 20260101
SCENARIO = "Fernhollow Garden Supply (invented)"

FIRST_MONTH = (2018, 1)  # month index 0
N_MONTHS = 106  # 2018-01 .. 2026-10
FIRST_ORIGIN = 59  # 2022-12
LAST_ORIGIN = 104  # 2026-09
H = 12
M = 12
LEVELS = (80, 95)

REGIONS = {"north": 1.0, "coast": 1.3, "inland": 0.8}
# family: (base level, seasonal amplitude, peak month 1-12, yearly growth)
FAMILIES = {
    "hoses": (420.0, 0.55, 6, 0.04),
    "seed": (900.0, 0.70, 3, 0.03),
    "soil": (1500.0, 0.50, 4, 0.05),
    "tools": (260.0, 0.25, 4, 0.02),
    "planters": (330.0, 0.45, 5, -0.02),
    "pump-spares": (0.0, 0.0, 6, 0.0),  # intermittent: see _intermittent
}
SERIES = [f"{r}/{f}" for r in REGIONS for f in FAMILIES]

LEVEL_SD = 0.002  # monthly random-walk step of the level, as a fraction of the base level
NOISE_SD = 0.07  # irregular noise, as a fraction of the base level

SHIFT_REGION = "coast"
SHIFT_FROM = 90  # 2025-07: a large garden-centre chain stops buying from the coast depot
SHIFT_DROP = 0.28  # the level falls by 28% of the base level

INTERMITTENT = "pump-spares"
SPARE_RATE = 0.30  # chance of any demand in a month (ADI about 3)

GAP_SERIES = "inland/planters"
GAP_MONTHS = (76, 77, 78)  # 2024-05 .. 2024-07, absent from the actuals files

REVISED_SERIES = "north/soil"
REVISED_MONTH = 86  # 2025-03
PRELIMINARY_FACTOR = 0.86  # first published 14% low (late-booked deliveries)
REVISION_FILE_MONTH = 87  # re-sent in actuals/2025-04.csv

INCUMBENT_Z = {80: 1.0, 95: 1.5}
PLANNER_UPLIFT = (0.08, 0.05)  # mean and sd of the planner's fractional uplift
TYPO_ORIGIN = 77  # 2024-06: the planner's first file has a slipped decimal point
TYPO_SERIES, TYPO_TARGET = "north/hoses", 78

INCUMBENT_GRID = {"alpha": (0.02, 0.04, 0.06, 0.08, 0.1), "beta": (0.001, 0.005, 0.01),
                  "gamma": (0.02, 0.05, 0.1, 0.15), "phi": (1.0,)}
CHALLENGER_GRID = {"alpha": (0.05, 0.1, 0.15, 0.2, 0.3, 0.4, 0.5, 0.6, 0.8), "beta": (0.001, 0.01, 0.03),
                   "gamma": (0.01, 0.05, 0.1, 0.2), "phi": (0.8, 0.9, 0.95, 0.98)}


# ---------------------------------------------------------------------------------------------
# months


def month_of(t: int) -> tuple[int, int]:
    """(year, month) of month index t."""
    y, m = divmod(FIRST_MONTH[0] * 12 + FIRST_MONTH[1] - 1 + t, 12)
    return y, m + 1


def label(t: int) -> str:
    """2024-03 style label of month index t."""
    y, m = month_of(t)
    return f"{y:04d}-{m:02d}"


def first_day(t: int) -> str:
    y, m = month_of(t)
    return f"{y:04d}-{m:02d}-01"


def last_day(t: int) -> str:
    y, m = month_of(t)
    return f"{y:04d}-{m:02d}-{calendar.monthrange(y, m)[1]:02d}"


def arrival(t: int, day: int, hour: str) -> str:
    """Timestamp on ``day`` of the month after month t (when month t's file arrived)."""
    y, m = month_of(t + 1)
    return f"{y:04d}-{m:02d}-{day:02d}T{hour}"


# ---------------------------------------------------------------------------------------------
# the invented history


def _seasonal_shape(amplitude: float, peak: int) -> np.ndarray:
    """Additive seasonal pattern, as a fraction of the base level: A cos(2 pi (month - peak) / 12)."""
    months = np.arange(12)
    return amplitude * np.cos(2 * np.pi * (months - (peak - 1)) / 12)


def _smooth_series(rng, scale: float, family: tuple, shifted: bool) -> np.ndarray:
    """Local linear trend plus a fixed additive seasonal pattern plus noise, in whole units.

    level_t = base (1 + growth t / 12) + random walk (steps LEVEL_SD x base); y_t = level_t +
    season_t + noise (sd NOISE_SD x base). The shifted region loses SHIFT_DROP x base a month from
    SHIFT_FROM on (a customer that bought a steady volume every month).
    """
    base, amplitude, peak, growth = family
    base *= scale
    t = np.arange(N_MONTHS)
    walk = np.cumsum(rng.normal(0.0, LEVEL_SD * base, N_MONTHS))
    level = base * (1.0 + growth * t / 12) + walk
    if shifted:
        level = level - np.where(t >= SHIFT_FROM, SHIFT_DROP * base, 0.0)
    season = base * _seasonal_shape(amplitude, peak)[t % 12]
    noise = rng.normal(0.0, NOISE_SD * base, N_MONTHS)
    return np.maximum(np.round(level + season + noise), 0.0)


def _intermittent(rng, scale: float, shifted: bool) -> np.ndarray:
    """Spare parts: a demand in a month with probability SPARE_RATE (higher in summer), 1 + Poisson units."""
    t = np.arange(N_MONTHS)
    chance = SPARE_RATE * (1.0 + _seasonal_shape(0.5, 6)[t % 12])
    occurs = rng.random(N_MONTHS) < chance
    mean = 3.0 * scale * np.where(shifted & (t >= SHIFT_FROM), 1.0 - SHIFT_DROP, 1.0)
    sizes = 1.0 + rng.poisson(mean)
    return np.where(occurs, sizes, 0.0)


def simulate() -> dict[str, np.ndarray]:
    """True monthly demand of every series, 2018-01 .. 2026-10 (whole units)."""
    rng = np.random.default_rng(SEED)
    out = {}
    for region, scale in REGIONS.items():
        shifted = region == SHIFT_REGION
        for family, spec in FAMILIES.items():
            key = f"{region}/{family}"
            if family == INTERMITTENT:
                out[key] = _intermittent(rng, scale, shifted)
            else:
                out[key] = _smooth_series(rng, scale, spec, shifted)
    return out


def preliminary_value(truth: dict[str, np.ndarray]) -> float:
    """The first-published value of the revised cell."""
    return float(np.round(truth[REVISED_SERIES][REVISED_MONTH] * PRELIMINARY_FACTOR))


def known_at(truth: dict[str, np.ndarray], origin: int) -> np.ndarray:
    """The (series x month) values a forecaster had for a run at ``origin``.

    The forecasters read the company's own sales system, so the ledger's feed outage (the gap)
    does not touch them; the revised cell is still at its preliminary value for runs made
    before the revision arrived (runs at origins before REVISION_FILE_MONTH).
    """
    data = np.array([truth[k] for k in SERIES], dtype=float)
    if REVISED_MONTH <= origin < REVISION_FILE_MONTH:
        data[SERIES.index(REVISED_SERIES), REVISED_MONTH] = preliminary_value(truth)
    return data[:, : origin + 1]


# ---------------------------------------------------------------------------------------------
# Holt-Winters by grid search (Hyndman et al. 2008, Table 2.1, additive error)


@dataclass(frozen=True)
class Grid:
    alpha: np.ndarray
    beta: np.ndarray
    gamma: np.ndarray
    phi: np.ndarray


def make_grid(spec: dict) -> Grid:
    """Every admissible combination (beta <= alpha, gamma <= 1 - alpha) of the listed weights."""
    rows = [(a, b, g, p) for a in spec["alpha"] for b in spec["beta"] for g in spec["gamma"]
            for p in spec["phi"] if b <= a and g <= 1 - a]
    cols = np.array(rows, dtype=float).T
    return Grid(*cols)


#: Free initial states: level, trend and 11 seasonals (the 12th makes the seasonals sum to 0).
N_INIT = 13


def _basis() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Initial (level, trend, season) of the zero pass and the N_INIT unit passes."""
    level, trend, season = np.zeros(N_INIT + 1), np.zeros(N_INIT + 1), np.zeros((N_INIT + 1, M))
    level[1], trend[2] = 1.0, 1.0
    for j in range(M - 1):
        season[3 + j, j], season[3 + j, M - 1] = 1.0, -1.0
    return level, trend, season


@dataclass
class Fit:
    """The filter after month t for every series and grid point, as a linear function of the
    initial states: pass 0 runs the data from zero states, pass r (1..N_INIT) runs zero data from
    the r-th unit initial state. One-step error e = u + V z for initial states z, so the SSE is
    uu + 2 c'z + z'A z with A = sum V V', c = sum V u, uu = sum u^2."""

    level: np.ndarray  # (pass, series, grid)
    trend: np.ndarray
    season: np.ndarray  # (pass, series, grid, 12), position = month index % 12
    A: np.ndarray  # (series, grid, N_INIT, N_INIT)
    c: np.ndarray  # (series, grid, N_INIT)
    uu: np.ndarray  # (series, grid)
    n: int = 0

    def solve(self) -> tuple[np.ndarray, np.ndarray]:
        """Initial states minimising the SSE, and that SSE, per series and grid point."""
        z = -np.linalg.solve(self.A, self.c[..., None])[..., 0]
        return z, self.uu + np.einsum("sgi,sgi->sg", self.c, z)

    def states(self, pick: np.ndarray, z: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Level, trend and seasonal states now, for grid point pick[s] and initial states z[s]."""
        rows = np.arange(pick.size)
        w = np.concatenate([np.ones((pick.size, 1)), z], axis=1).T  # (pass, series)
        level = (self.level[:, rows, pick] * w).sum(axis=0)
        trend = (self.trend[:, rows, pick] * w).sum(axis=0)
        season = (self.season[:, rows, pick] * w[..., None]).sum(axis=0)
        return level, trend, season


def hw_filter(y: np.ndarray, grid: Grid, until: int) -> Iterator[tuple[int, Fit]]:
    """Run ETS(A,Ad,A) over months 0..until for every series and grid point; yield after each month.

    One-step forecast l + phi b + s; error e = y - forecast; l <- l + phi b + alpha e;
    b <- phi b + beta e; s <- s + gamma e (the additive-error form of Hyndman et al. 2008).
    The recursion is linear in the initial states, which are therefore estimated exactly by
    least squares (the Gaussian maximum-likelihood estimate given the weights).
    """
    n_series, g = y.shape[0], grid.alpha.size
    level0, trend0, season0 = _basis()
    shape = (N_INIT + 1, n_series, g)
    fit = Fit(np.broadcast_to(level0[:, None, None], shape).copy(),
              np.broadcast_to(trend0[:, None, None], shape).copy(),
              np.broadcast_to(season0[:, None, None, :], shape + (M,)).copy(),
              np.zeros((n_series, g, N_INIT, N_INIT)), np.zeros((n_series, g, N_INIT)), np.zeros((n_series, g)))
    data = np.zeros((N_INIT + 1, n_series, 1))
    for t in range(until + 1):
        k = t % M
        data[0, :, 0] = y[:, t]
        damped = grid.phi * fit.trend
        e = data - (fit.level + damped + fit.season[..., k])
        u, v = e[0], np.moveaxis(e[1:], 0, -1)  # (series, grid), (series, grid, N_INIT)
        fit.A += v[..., :, None] * v[..., None, :]
        fit.c += v * u[..., None]
        fit.uu += u * u
        fit.level = fit.level + damped + grid.alpha * e
        fit.trend = damped + grid.beta * e
        fit.season[..., k] += grid.gamma * e
        fit.n = t + 1
        yield t, fit


def hw_forecast(fit: Fit, grid: Grid, pick: np.ndarray, z: np.ndarray, sigma2: np.ndarray, origin: int,
                zvalues: dict[int, float], quantiles: dict[str, float] | None = None) -> dict[str, np.ndarray]:
    """Point forecasts and normal bounds (series x H) at ``origin`` for grid point pick[s] of
    series s with initial states z[s] and one-step variance sigma2[s]; ``quantiles`` maps a
    column name (q25) to its multiplier of the forecast standard deviation."""
    alpha, beta, phi = grid.alpha[pick], grid.beta[pick], grid.phi[pick]
    level, trend, season = fit.states(pick, z)
    steps = np.arange(1, H + 1)
    phi_h = np.cumsum(phi[:, None] ** steps, axis=1)  # phi + ... + phi^h
    point = level[:, None] + phi_h * trend[:, None] + season[:, (origin + steps) % M]
    c = alpha[:, None] + beta[:, None] * phi_h[:, :-1]  # c_j, j = 1..H-1 (no seasonal term for j < m)
    factor = 1.0 + np.concatenate([np.zeros((pick.size, 1)), np.cumsum(c * c, axis=1)], axis=1)
    sd = np.sqrt(sigma2)[:, None] * np.sqrt(factor)
    out = {"forecast": point}
    for lv, zz in zvalues.items():
        out[f"lower_{lv}"] = point - zz * sd
        out[f"upper_{lv}"] = point + zz * sd
    for name, zz in (quantiles or {}).items():
        out[name] = point + zz * sd
    return out


TRUE_Z = {80: 1.2815515655446004, 95: 1.959963984540054}
# The challenger's quantile export. q25, q50 and q75 are the quantiles of its normal predictive
# distribution (Phi^-1(0.75) = 0.6745); the tail quantiles are PLANTED over-confident: the export
# puts q10/q90 at 1.0 and q05/q95 at 1.15 forecast standard deviations from the point, where the
# distribution has 1.2816 and 1.6449.
CHALLENGER_Q = {"q05": -1.15, "q10": -1.0, "q25": -0.6744897501960817, "q50": 0.0,
                "q75": 0.6744897501960817, "q90": 1.0, "q95": 1.15}


def _best(fit: Fit) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per series: the grid point with the smallest SSE, its initial states and its SSE."""
    z, sse = fit.solve()
    pick = sse.argmin(axis=1)
    rows = np.arange(pick.size)
    return pick, z[rows, pick], sse[rows, pick]


def challenger_runs(truth) -> dict[int, dict[str, np.ndarray]]:
    """ETS(A,Ad,A), every weight re-chosen at every origin (minimum in-sample SSE on the grid)."""
    grid = make_grid(CHALLENGER_GRID)
    out = {}
    for origins, data in _vintages(truth):
        for t, fit in hw_filter(data, grid, max(origins)):
            if t in origins:
                pick, z, sse = _best(fit)
                out[t] = hw_forecast(fit, grid, pick, z, _fpe(sse, fit.n, N_INIT + 4), t, TRUE_Z, CHALLENGER_Q)
    return out


def incumbent_runs(truth) -> dict[int, dict[str, np.ndarray]]:
    """ETS(A,A,A), weights re-chosen from the stable grid at December origins only."""
    grid = make_grid(INCUMBENT_GRID)
    out = {}
    for origins, data in _vintages(truth):
        chosen = None
        for t, fit in hw_filter(data, grid, max(origins)):
            if t >= FIRST_ORIGIN and (chosen is None or month_of(t)[1] == 12):
                chosen = _best(fit)
            if t in origins:
                pick, z, _ = chosen
                out[t] = hw_forecast(fit, grid, pick, z, _sse_now(fit, pick, z) / fit.n, t, INCUMBENT_Z)
    return out


def _fpe(sse: np.ndarray, n: int, p: int) -> np.ndarray:
    """Akaike's final prediction error, (SSE / n) (n + p) / (n - p): the one-step variance of a
    model with p estimated parameters, in-sample optimism and estimation error allowed for
    (Akaike 1969, "Fitting autoregressive models for prediction"; from memory)."""
    return sse / n * (n + p) / (n - p)


def _sse_now(fit: Fit, pick: np.ndarray, z: np.ndarray) -> np.ndarray:
    """SSE up to now of the weights and initial states chosen at the last re-estimation."""
    rows = np.arange(pick.size)
    A, c, uu = fit.A[rows, pick], fit.c[rows, pick], fit.uu[rows, pick]
    return uu + 2 * np.einsum("si,si->s", c, z) + np.einsum("si,sij,sj->s", z, A, z)


def _vintages(truth) -> list[tuple[set[int], np.ndarray]]:
    """Origins grouped by the data they saw: the final data, and the preliminary vintage."""
    prelim = set(range(REVISED_MONTH, REVISION_FILE_MONTH))
    final = set(range(FIRST_ORIGIN, LAST_ORIGIN + 1)) - prelim
    return [(final, known_at(truth, LAST_ORIGIN)), (prelim, known_at(truth, max(prelim)))]


def snaive_runs(truth) -> dict[int, dict[str, np.ndarray]]:
    """Seasonal naive with its standard intervals (ledger.methods.forecasters, FPP3 Table 5.2)."""
    out = {}
    for t in range(FIRST_ORIGIN, LAST_ORIGIN + 1):
        data = known_at(truth, t)
        parts = [reference_forecast(row, method="snaive", h=H, m=M, levels=LEVELS) for row in data]
        out[t] = {key: np.array([p[key] for p in parts]) for key in parts[0]}
    return out


def planner_runs(incumbent) -> dict[int, dict[str, np.ndarray]]:
    """The incumbent's point forecast times (1 + u), u ~ N(0.08, 0.05), in whole units."""
    rng = np.random.default_rng([SEED, 2])
    out = {}
    for t in range(FIRST_ORIGIN, LAST_ORIGIN + 1):
        base = np.maximum(incumbent[t]["forecast"], 0.0)
        uplift = rng.normal(PLANNER_UPLIFT[0], PLANNER_UPLIFT[1], base.shape)
        out[t] = {"forecast": np.round(base * (1.0 + uplift))}
    return out


# ---------------------------------------------------------------------------------------------
# writing


def _num(x: float, digits: int) -> str:
    return f"{float(np.round(x, digits)) + 0.0:.{digits}f}"


def _write(path: Path, header: list[str], rows: list[list[str]]) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    text = "".join(",".join(r) + "\n" for r in [header] + rows)
    path.write_bytes(text.encode("utf-8"))


def _run_rows(run: dict[str, np.ndarray], origin: int, columns: list[str], period, digits=1) -> list[list[str]]:
    """Rows of one run: ``columns`` are series, period, then keys of ``run`` (floored at 0)."""
    rows = []
    for s, key in enumerate(SERIES):
        for j in range(H):
            values = [_num(max(run[c][s, j], 0.0), digits) for c in columns[2:]]
            rows.append([key, period(origin + 1 + j)] + values)
    return rows


INCUMBENT_COLS = ["series", "period", "forecast", "lower_80", "upper_80", "lower_95", "upper_95"]
CHALLENGER_COLS = ["series", "period", "forecast", "lower_95", "upper_95", "lower_80", "upper_80", *CHALLENGER_Q]


def _actual_rows(truth, months, *, revised: bool = False) -> list[list[str]]:
    """series, period, actual rows; the gap left out, the revised cell at its published value."""
    rows = []
    for key in SERIES:
        for t in months:
            if key == GAP_SERIES and t in GAP_MONTHS:
                continue
            value = truth[key][t]
            if key == REVISED_SERIES and t == REVISED_MONTH and not revised:
                value = preliminary_value(truth)
            rows.append([key, label(t), _num(value, 0)])
    return rows


def write_actuals(out: Path, truth) -> list[list[str]]:
    """The history file and one file per month; returns manifest rows."""
    header = ["series", "period", "actual"]
    name = f"actuals/history-to-{label(FIRST_ORIGIN)}.csv"
    _write(out / name, header, _actual_rows(truth, range(FIRST_ORIGIN + 1)))
    manifest = [[arrival(FIRST_ORIGIN, 2, "07:00:00"), "actuals", name, "", "", "false",
                 f"history {label(0)} to {label(FIRST_ORIGIN)}"]]
    for t in range(FIRST_ORIGIN + 1, N_MONTHS):
        rows, note = _actual_rows(truth, [t]), ""
        if t == REVISION_FILE_MONTH:
            rows += [r for r in _actual_rows(truth, [REVISED_MONTH], revised=True) if r[0] == REVISED_SERIES]
            note = f"re-sends {REVISED_SERIES} {label(REVISED_MONTH)} with a corrected value"
        if t in GAP_MONTHS:
            note = f"feed outage: no row for {GAP_SERIES}"
        name = f"actuals/{label(t)}.csv"
        _write(out / name, header, rows)
        manifest.append([arrival(t, 2, "07:00:00"), "actuals", name, "", "", "false", note])
    return manifest


def write_runs(out: Path, truth) -> list[list[str]]:
    """Every run file; returns manifest rows."""
    incumbent = incumbent_runs(truth)
    runs = {"incumbent-hw": incumbent, "seasonal-naive": snaive_runs(truth),
            "challenger-damped": challenger_runs(truth), "planner-override": planner_runs(incumbent)}
    manifest = []
    manifest += _write_incumbent(out, runs["incumbent-hw"])
    manifest += _write_snaive(out, runs["seasonal-naive"])
    manifest += _write_challenger(out, runs["challenger-damped"])
    manifest += _write_planner(out, runs["planner-override"])
    return manifest


def _write_incumbent(out, runs) -> list[list[str]]:
    manifest = []
    for t, run in runs.items():
        name = f"runs/incumbent-hw/{label(t)}.csv"
        _write(out / name, INCUMBENT_COLS, _run_rows(run, t, INCUMBENT_COLS, label))
        manifest.append([arrival(t, 3, "08:00:00"), "snapshot", name, "incumbent-hw", label(t), "false", ""])
    return manifest


BACKFILL_UNTIL = 70  # 2023-11: the benchmark's 2023 runs arrive as one back-fill in January 2024


def _write_snaive(out, runs) -> list[list[str]]:
    cols = INCUMBENT_COLS
    backfill = []
    for t in range(FIRST_ORIGIN, BACKFILL_UNTIL + 1):
        backfill += [["seasonal-naive", label(t)] + r for r in _run_rows(runs[t], t, cols, label)]
    name = "runs/seasonal-naive/backfill-2023.csv"
    _write(out / name, ["model", "origin"] + cols, backfill)
    manifest = [[arrival(BACKFILL_UNTIL + 1, 3, "08:05:00"), "snapshot", name, "", "", "false",
                 f"back-fill: origins {label(FIRST_ORIGIN)} to {label(BACKFILL_UNTIL)}"]]
    for t in range(BACKFILL_UNTIL + 1, LAST_ORIGIN + 1):
        name = f"runs/seasonal-naive/{label(t)}.csv"
        _write(out / name, cols, _run_rows(runs[t], t, cols, label))
        manifest.append([arrival(t, 3, "08:10:00"), "snapshot", name, "seasonal-naive", label(t), "false", ""])
    return manifest


def _write_challenger(out, runs) -> list[list[str]]:
    manifest = []
    for t, run in runs.items():
        name = f"runs/challenger-damped/{label(t)}.csv"
        rows = _run_rows(run, t, CHALLENGER_COLS, first_day)
        # This tool exports period first, then series: the column order does not matter.
        _write(out / name, ["period", "series"] + CHALLENGER_COLS[2:], [[r[1], r[0]] + r[2:] for r in rows])
        manifest.append([arrival(t, 3, "08:20:00"), "snapshot", name, "challenger-damped", label(t), "false", ""])
    return manifest


def _write_planner(out, runs) -> list[list[str]]:
    manifest = []
    header = ["Series", "Period", "Forecast"]
    for t, run in runs.items():
        name = f"runs/planner-override/{label(t)}.csv"
        rows = _run_rows(run, t, ["series", "period", "forecast"], last_day, digits=0)
        if t == TYPO_ORIGIN:
            fixed = f"runs/planner-override/{label(t)}-corrected.csv"
            _write(out / fixed, header, rows)
            rows = _typo(rows)
        _write(out / name, header, rows)
        manifest.append([arrival(t, 5, "09:00:00"), "snapshot", name, "planner-override", label(t), "false", ""])
        if t == TYPO_ORIGIN:
            manifest.append([arrival(t, 8, "09:00:00"), "snapshot", fixed, "planner-override", label(t), "true",
                             f"corrects a slipped decimal point in {TYPO_SERIES} {label(TYPO_TARGET)}"])
    return manifest


def _typo(rows: list[list[str]]) -> list[list[str]]:
    out = [list(r) for r in rows]
    for r in out:
        if r[0] == TYPO_SERIES and r[1] == last_day(TYPO_TARGET):
            r[2] = _num(float(r[2]) * 10, 0)
    return out


MANIFEST_COLS = ["step", "arrived", "kind", "file", "model", "origin", "supersede", "note"]


def write_manifest(out: Path, rows: list[list[str]]) -> None:
    """Replay steps in arrival order (ties keep the order they were listed in)."""
    ordered = sorted(rows, key=lambda r: r[0])
    _write(out / "manifest.csv", MANIFEST_COLS, [[str(i + 1)] + r for i, r in enumerate(ordered)])


def generate(out: Path) -> None:
    """Write every data file of the scenario into ``out``."""
    truth = simulate()
    manifest = write_actuals(out, truth) + write_runs(out, truth)
    write_manifest(out, manifest)


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=Path(__file__).resolve().parent,
                        help="folder to write into (default: this script's folder)")
    args = parser.parse_args(argv)
    generate(args.out)


if __name__ == "__main__":
    main()
