"""Benchmark: operating characteristics of the drift tests (issue 13), by seeded simulation.

    python tests/benchmarks/bench_findings.py [--trials 300] [--null-trials 3000] [--detail]

For record lengths 24, 36 and 48 monthly periods, steps of 1, 2 and 3 sigma in the mean error
starting at periods 4, 8, 12, ..., T-4 and lasting to the end of the record, with iid N(0, 1)
errors and AR(1) errors (phi = 0.5, marginal sd 1), it runs the tests that ``flags`` runs on
one series x model x horizon sequence (:mod:`ledger.stats.changepoint`: the GLS bias scan and
the size test, Bonferroni pair, level 0.05; the autocorrelation pooled over the trials, as
``flags`` pools it over a model's series) and prints:

* share flagged on the full record;
* ORACLE: the power of the ideal test that knows the start and end of the step and the true
  phi and sigma: the GLS z of the step, z = x~'w / (sqrt(x~'x~) sigma_w) on the whitened errors
  w (module docstring of changepoint.py), two-sided at level 0.025, the bias test's share of
  the same Bonferroni pair, so the same per-sequence false rate after the same multiplicity;
  simulated on the same trials; then flagged / oracle;
* median delay: periods from the first shifted period until the test on the record so far
  first flags (1 = flagged on the first shifted period's actual), over the flagged trials;
* share of flagged trials dated within +-2 periods of the true start;
* the false-finding rate per sequence with no step (pooled and, for comparison, each sequence's
  own autocorrelation), over ``--null-trials`` sequences with its 95% interval.

sigma, stated in every table header: "marginal" is the sd of the errors themselves (the issue's
unit); "long-run" is the long-run sd, sigma sqrt((1 + phi) / (1 - phi)) = 1.73 sigma at phi = 0.5,
the sd of the mean of many consecutive errors times sqrt(n). For iid errors the two coincide.

Targets: false findings <= 5% per sequence for iid and AR(1) errors; a 2 sigma step lasting at
least 8 periods found in >= 95% of trials wherever it starts; detected steps dated within +-2
periods in >= 80%. The summary lines say which hold, and give the oracle's power of a 2 sigma
step lasting 8 periods in closed form. Fixed seeds; invented data.
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np
from scipy import stats

from ledger.stats.changepoint import bias_scan, bonferroni_pair, residual_phi, size_shift, whiten

LEVEL = 0.05
ORACLE_LEVEL = LEVEL / 2  # the bias test's half of the Bonferroni pair
LENGTHS = (24, 36, 48)
STEPS = (1.0, 2.0, 3.0)
PHI = 0.5
#: (label, autocorrelation, sd unit of the step in marginal sds)
CASES = (("iid", 0.0, 1.0), ("AR(1) 0.5, σ marginal", PHI, 1.0),
         ("AR(1) 0.5, σ long-run", PHI, math.sqrt((1 + PHI) / (1 - PHI))))


def ar1(rng: np.random.Generator, trials: int, n: int, phi: float) -> np.ndarray:
    x = np.empty((trials, n))
    x[:, 0] = rng.standard_normal(trials)
    for t in range(1, n):
        x[:, t] = phi * x[:, t - 1] + np.sqrt(1 - phi * phi) * rng.standard_normal(trials)
    return x


def judge(e: np.ndarray, pooled: bool = True) -> tuple[np.ndarray, np.ndarray]:
    """(flagged, dated start) per row, as drift findings judge one sequence."""
    g = np.sqrt(np.abs(e))
    if pooled:
        b = bias_scan(e, phi=residual_phi("scan", e).mean())
        s = size_shift(g, phi=residual_phi("size", g).mean())
    else:
        b, s = bias_scan(e), size_shift(g)
    p = bonferroni_pair(b.p_value, s.p_value)
    return p <= LEVEL, np.where(b.p_value <= s.p_value, b.start, s.start)


def step_regressor(n: int, start: int, end: int, phi: float) -> np.ndarray:
    """The whitened step 1{start <= t < end} (Prais-Winsten), the oracle's GLS regressor."""
    return whiten((np.arange(n) >= start) & (np.arange(n) < end), phi)


def oracle(e: np.ndarray, start: int, phi: float) -> np.ndarray:
    """Per row: does the known-start, known-end (the record's end), known-phi, known-sigma GLS
    z-test of the step reject at ORACLE_LEVEL (two-sided)? Marginal sd of the errors is 1."""
    x = step_regressor(e.shape[1], start, e.shape[1], phi)
    z = whiten(e, phi) @ x / (np.sqrt(x @ x) * math.sqrt(1 - phi * phi))
    return np.abs(z) > stats.norm.isf(ORACLE_LEVEL / 2)


def oracle_power(size: float, length: int, phi: float) -> tuple[float, float]:
    """(z, power) in closed form for a step of ``size`` marginal sds lasting ``length`` cells to
    the end of a record, started after the first cell: x~'x~ = 1 + (length - 1)(1 - phi)^2, the
    whitened innovations have variance 1 - phi^2, so z = size sqrt(x~'x~ / (1 - phi^2))."""
    z = size * math.sqrt((1 + (length - 1) * (1 - phi) ** 2) / (1 - phi * phi))
    c = stats.norm.isf(ORACLE_LEVEL / 2)
    return z, float(stats.norm.sf(c - z) + stats.norm.cdf(-c - z))


def delays(e: np.ndarray, start: int) -> np.ndarray:
    """Per row: periods after the step began until the record so far is first flagged (NaN: never)."""
    out = np.full(e.shape[0], np.nan)
    for n in range(max(start + 1, 8), e.shape[1] + 1):
        flagged, _ = judge(e[:, :n])
        new = flagged & np.isnan(out)
        out[new] = n - start
    return out


def row(e0: np.ndarray, size: float, start: int, phi: float) -> tuple[float, ...]:
    e = e0 + size * (np.arange(e0.shape[1]) >= start)
    flagged, dated = judge(e)
    delay = delays(e, start)
    ok = np.abs(dated - start) <= 2
    return (float(flagged.mean()), float(np.nanmedian(delay)) if np.isfinite(delay).any() else np.nan,
            float(ok[flagged].mean()) if flagged.any() else np.nan, float(oracle(e, start, phi).mean()))


def _interval(rate: float, n: int) -> str:
    half = 1.96 * math.sqrt(max(rate * (1 - rate), 1e-12) / n)
    return f"{rate:.1%} ({max(0.0, rate - half):.1%}–{rate + half:.1%})"


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--trials", type=int, default=300)
    ap.add_argument("--null-trials", type=int, default=3000)
    ap.add_argument("--detail", action="store_true", help="one line per start as well")
    args = ap.parse_args()
    t0, c0 = time.perf_counter(), time.process_time()
    results, false = [], []
    for kind, phi, unit in CASES:
        for n in LENGTHS:
            rng = np.random.default_rng([13, n, int(phi * 10)])
            base = ar1(rng, args.trials, n, phi)
            if unit == 1.0:
                null = ar1(np.random.default_rng([14, n, int(phi * 10)]), args.null_trials, n, phi)
                false.append((kind.split(",")[0], n, float(judge(null)[0].mean()),
                              float(judge(null, pooled=False)[0].mean())))
            for size in STEPS:
                for start in range(4, n - 3, 4):
                    results.append((kind, n, size, start, *row(base, size * unit, start, phi)))
    print(f"{args.trials} trials per cell ({args.null_trials} with no step), level {LEVEL} per sequence; "
          f"{time.perf_counter() - t0:.0f} s wall, {time.process_time() - c0:.0f} s CPU\n")
    print("| errors | T | no step: false findings (pooled), 95% interval | (own autocorrelation) |")
    print("|---|---|---|---|")
    for kind, n, pooled, own in false:
        print(f"| {kind} | {n} | {_interval(pooled, args.null_trials)} | {_interval(own, args.null_trials)} |")
    print("\n| errors, unit of the step | T | step | flagged, steps lasting >= 8 (min–max over starts) "
          "| oracle, same starts | flagged / oracle (min) | flagged, last start (T-4) | median delay (periods) "
          "| dated within ±2 (mean; min over steps lasting >= 8) |")
    print("|---|---|---|---|---|---|---|---|---|")
    for kind, *_ in CASES:
        for n in LENGTHS:
            for size in STEPS:
                rows = [r for r in results if r[:3] == (kind, n, size)]
                long_ = [r for r in rows if n - r[3] >= 8]
                last = [r for r in rows if r[3] == max(x[3] for x in rows)][0]
                ratio = min(r[4] / r[7] for r in long_ if r[7] > 0)
                dated = np.nanmean([r[6] for r in rows])
                dated_min = np.nanmin([r[6] for r in long_])
                delay = np.nanmedian([r[5] for r in rows])
                print(f"| {kind} | {n} | {size:g}σ | {min(r[4] for r in long_):.0%}–{max(r[4] for r in long_):.0%} "
                      f"| {min(r[7] for r in long_):.0%}–{max(r[7] for r in long_):.0%} | {ratio:.2f} "
                      f"| {last[4]:.0%} | {delay:.0f} | {dated:.0%}; {dated_min:.0%} |")
    if args.detail:
        print("\n| errors, unit of the step | T | step | start | flagged | oracle | median delay | dated within ±2 |")
        print("|---|---|---|---|---|---|---|---|")
        for r in results:
            print(f"| {r[0]} | {r[1]} | {r[2]:g}σ | {r[3]} | {r[4]:.0%} | {r[7]:.0%} | {r[5]:.0f} | {r[6]:.0%} |")
    print()
    for kind, phi, unit in CASES:
        worst_false = max(f[2] for f in false if f[0] == kind.split(",")[0])
        two = [r for r in results if r[0] == kind and r[2] == 2.0 and r[1] - r[3] >= 8]
        found, dated = min(r[4] for r in two), min(r[6] for r in two)
        z, power = oracle_power(2.0 * unit, 8, phi)
        print(f"{kind}: false findings at most {worst_false:.1%} (target <= 5%: {_met(worst_false <= 0.05)}); "
              f"2σ steps lasting >= 8 periods found in at least {found:.0%} (target >= 95%: {_met(found >= 0.95)}; "
              f"oracle for 8 periods: z = {z:.2f}, power {power:.1%}), "
              f"dated within ±2 in at least {dated:.0%} (target >= 80%: {_met(dated >= 0.8)})")


def _met(ok: bool) -> str:
    return "met" if ok else "NOT met"


if __name__ == "__main__":
    main()
