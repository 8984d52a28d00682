"""Benchmark: operating characteristics of the drift tests (issue 13), by seeded simulation.

    python tests/benchmarks/bench_findings.py [--trials 300] [--detail]

For record lengths 24, 36 and 48 monthly periods, steps of 1, 2 and 3 sigma in the mean error
starting at periods 4, 8, 12, ..., T-4, with iid N(0, 1) errors and AR(1) errors (phi = 0.5,
marginal sd 1), it runs the tests that ``flags`` runs on one series x model x horizon sequence
(:mod:`ledger.stats.changepoint`: bias scan and size test, Bonferroni pair, level 0.05; the
autocorrelation pooled over the trials, as ``flags`` pools it over a model's series) and prints:

* share flagged on the full record;
* median delay: periods from the first shifted period until the test on the record so far
  first flags (1 = flagged on the first shifted period's actual), over the flagged trials;
* share of flagged trials dated within +-2 periods of the true start;
* the false-finding rate per sequence with no step (pooled and, for comparison, each sequence's
  own autocorrelation).

Targets: false findings <= 5% per sequence for iid and AR(1) errors; a 2 sigma step lasting at
least 8 periods found in >= 95% of trials wherever it starts; detected steps dated within +-2
periods in >= 80%. The summary lines say which hold. Fixed seeds; invented data.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from ledger.stats.changepoint import bias_scan, bonferroni_pair, residual_phi, size_shift

LEVEL = 0.05
LENGTHS = (24, 36, 48)
STEPS = (1.0, 2.0, 3.0)


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


def delays(e: np.ndarray, start: int) -> np.ndarray:
    """Per row: periods after the step began until the record so far is first flagged (NaN: never)."""
    out = np.full(e.shape[0], np.nan)
    for n in range(max(start + 1, 8), e.shape[1] + 1):
        flagged, _ = judge(e[:, :n])
        new = flagged & np.isnan(out)
        out[new] = n - start
    return out


def row(e0: np.ndarray, size: float, start: int) -> tuple[float, float, float]:
    e = e0 + size * (np.arange(e0.shape[1]) >= start)
    flagged, dated = judge(e)
    delay = delays(e, start)
    ok = np.abs(dated - start) <= 2
    return (float(flagged.mean()), float(np.nanmedian(delay)) if np.isfinite(delay).any() else np.nan,
            float(ok[flagged].mean()) if flagged.any() else np.nan)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--trials", type=int, default=300)
    ap.add_argument("--detail", action="store_true", help="one line per start as well")
    args = ap.parse_args()
    t0 = time.perf_counter()
    results, false = [], []
    for kind, phi in (("iid", 0.0), ("AR(1) 0.5", 0.5)):
        for n in LENGTHS:
            rng = np.random.default_rng([13, n, int(phi * 10)])
            base = ar1(rng, args.trials, n, phi)
            false.append((kind, n, float(judge(base)[0].mean()), float(judge(base, pooled=False)[0].mean())))
            for size in STEPS:
                for start in range(4, n - 3, 4):
                    results.append((kind, n, size, start, *row(base, size, start)))
    print(f"{args.trials} trials per cell, level {LEVEL}; {time.perf_counter() - t0:.0f} s\n")
    print("| errors | T | no step: false findings (pooled) | (own autocorrelation) |")
    print("|---|---|---|---|")
    for kind, n, pooled, own in false:
        print(f"| {kind} | {n} | {pooled:.1%} | {own:.1%} |")
    print("\n| errors | T | step | flagged, steps lasting >= 8 (min-max over starts) | flagged, last start (T-4) "
          "| median delay (periods) | dated within +-2 |")
    print("|---|---|---|---|---|---|---|")
    for kind in ("iid", "AR(1) 0.5"):
        for n in LENGTHS:
            for size in STEPS:
                rows = [r for r in results if r[:3] == (kind, n, size)]
                long_ = [r[4] for r in rows if n - r[3] >= 8]
                last = [r for r in rows if r[3] == max(x[3] for x in rows)][0]
                dated = np.nanmean([r[6] for r in rows])
                delay = np.nanmedian([r[5] for r in rows])
                print(f"| {kind} | {n} | {size:g}σ | {min(long_):.0%}–{max(long_):.0%} | {last[4]:.0%} "
                      f"| {delay:.0f} | {dated:.0%} |")
    if args.detail:
        print("\n| errors | T | step | start | flagged | median delay | dated within +-2 |")
        print("|---|---|---|---|---|---|---|")
        for r in results:
            print(f"| {r[0]} | {r[1]} | {r[2]:g}σ | {r[3]} | {r[4]:.0%} | {r[5]:.0f} | {r[6]:.0%} |")
    print()
    for kind in ("iid", "AR(1) 0.5"):
        worst_false = max(f[2] for f in false if f[0] == kind)
        two = [r for r in results if r[0] == kind and r[2] == 2.0 and r[1] - r[3] >= 8]
        found, dated = min(r[4] for r in two), min(r[6] for r in two)
        print(f"{kind}: false findings at most {worst_false:.1%} (target <= 5%: {_met(worst_false <= 0.05)}); "
              f"2σ steps lasting >= 8 periods found in at least {found:.0%} (target >= 95%: {_met(found >= 0.95)}), "
              f"dated within +-2 in at least {dated:.0%} (target >= 80%: {_met(dated >= 0.8)})")


def _met(ok: bool) -> str:
    return "met" if ok else "NOT met"

if __name__ == "__main__":
    main()
