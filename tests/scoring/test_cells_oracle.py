"""Every aggregate column of ``scores`` against a naive per-group loop over cells.

Seeded random ledgers with zero actuals, gaps (cells without a scale), runs with and without
interval levels, quantiles on one model only, a superseded run, revisions and an as-of between
revisions. The oracle rebuilds each cell in plain Python from what was written, then applies the
definitions of DESIGN.md one group at a time.
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.periods import index_start
from ledger.store import utc_now

M = 4  # quarterly series: season length 4


def _label(i: int) -> str:
    d = index_start(i, "quarterly")
    return f"{d.year}Q{(d.month - 1) // 3 + 1}"


def build(path, seed: int):
    rng = np.random.default_rng(seed)
    series = [f"S{i}" for i in range(5)]
    start = 4 * 2018
    actual = {}  # (series, index) -> value at the first recording
    for s in series:
        level = rng.uniform(5, 50)
        for i in range(start, start + 28):
            if s == "S3" and i in (start + 5, start + 6):   # a gap: those pairs have no partner
                continue
            v = max(0.0, round(level + rng.normal(0, 5), 1))
            if s == "S4" and i < start + 6:                  # short history at early origins
                continue
            actual[(s, i)] = 0.0 if rng.random() < 0.1 else v
    runs = []  # (model, origin, rows)
    for model, levels, quants in (("alpha", (80, 95), True), ("beta", (80,), False), ("gamma", (), False)):
        for origin in range(start + 4, start + 24, 3):
            rows = []
            for s in series:
                for h in (1, 2, 3):
                    f = round(rng.uniform(0, 60), 2)
                    row = {"series": s, "period": _label(origin + h), "forecast": f}
                    for lv in levels:
                        w = rng.uniform(1, 20) * (1.5 if lv == 95 else 1)
                        if rng.random() < 0.8:
                            row[f"lower_{lv}"], row[f"upper_{lv}"] = f - w, f + w
                    if quants:
                        a, b = sorted(rng.uniform(0, 60, 2))
                        row["q10"], row["q90"] = a, b
                    rows.append(row)
            runs.append((model, origin, pd.DataFrame(rows)))
    book = Ledger.open(path)
    book.record_actuals(pd.DataFrame([{"series": s, "period": _label(i), "actual": v}
                                      for (s, i), v in actual.items()]), name="actuals.csv")
    for model, origin, rows in runs:
        book.snapshot(rows, model=model, origin=_label(origin), name=f"{model}.csv")
    first = utc_now()
    # after `first`: a superseding run and revised actuals
    model, origin, rows = runs[1]
    rows2 = rows.assign(forecast=rows["forecast"] + 1.0)
    book.snapshot(rows2, model=model, origin=_label(origin), supersede=True, name="fix.csv")
    revised = {k: v + 3.0 for k, v in itertools.islice(actual.items(), 0, None, 7)}
    book.record_actuals(pd.DataFrame([{"series": s, "period": _label(i), "actual": v}
                                      for (s, i), v in revised.items()]), name="revised.csv")
    book.close()
    later = {**actual, **revised}
    runs_later = list(runs)
    runs_later[1] = (model, origin, rows2)
    return {"first": (first, actual, runs), "now": (None, later, runs_later)}


def oracle_cells(actual, runs):
    def scale(s, origin, power):
        d = [abs(actual[(s, t)] - actual[(s, t - M)]) ** power for (ss, t) in actual
             if ss == s and t <= origin and (s, t - M) in actual]
        if not d:
            return None
        q = sum(d) / len(d)
        return q if q > 0 else None

    cells = []
    for model, origin, rows in runs:
        for r in rows.to_dict("records"):
            i = next(k for k in range(4 * 2018, 4 * 2030) if _label(k) == r["period"])
            if (r["series"], i) not in actual:
                continue
            cells.append(dict(model=model, series=r["series"], horizon=i - origin, y=actual[(r["series"], i)],
                              f=r["forecast"], q=scale(r["series"], origin, 1), q2=scale(r["series"], origin, 2),
                              row=r))
    return cells


def oracle(cells, by):
    out = {}
    groups = {}
    for c in cells:
        groups.setdefault(tuple(c[k] for k in by), []).append(c)
    for key, g in groups.items():
        e = [c["y"] - c["f"] for c in g]
        ay = [abs(c["y"]) for c in g]
        row = {"n": len(g), "mae": np.mean(np.abs(e)), "rmse": math.sqrt(np.mean(np.square(e))),
               "bias": np.mean(e)}
        nz = [(c, ei) for c, ei in zip(g, e) if c["y"] != 0]
        row["mape"] = np.mean([100 * abs(ei) / abs(c["y"]) for c, ei in nz]) if nz else np.nan
        row["smape"] = np.mean([0.0 if abs(c["y"]) + abs(c["f"]) == 0 else
                                200 * abs(ei) / (abs(c["y"]) + abs(c["f"])) for c, ei in zip(g, e)])
        row["wape"] = 100 * sum(map(abs, e)) / sum(ay) if sum(ay) > 0 else np.nan
        row["bias_pct"] = 100 * sum(e) / sum(ay) if sum(ay) > 0 else np.nan
        sc = [(c, ei) for c, ei in zip(g, e) if c["q"] is not None]
        row["mase"] = np.mean([abs(ei) / c["q"] for c, ei in sc]) if sc else np.nan
        row["rmsse"] = math.sqrt(np.mean([ei * ei / c["q2"] for c, ei in sc])) if sc else np.nan
        row["n_zero_actual"] = sum(1 for c in g if c["y"] == 0)
        row["n_unscaled"] = sum(1 for c in g if c["q"] is None)
        row["n_excluded"] = 0   # no events in these ledgers (tests/scoring/test_events.py has them)
        for lv in (80, 95):
            hit = [c for c in g if not pd.isna(c["row"].get(f"lower_{lv}", np.nan))]
            row[f"n_{lv}"] = len(hit)      # cells carrying level lv's bounds
            if not hit:
                continue
            a = 1 - lv / 100
            lo = [c["row"][f"lower_{lv}"] for c in hit]
            hi = [c["row"][f"upper_{lv}"] for c in hit]
            ys = [c["y"] for c in hit]
            iss = [(u - l) + 2 / a * max(l - y, 0) + 2 / a * max(y - u, 0) for l, u, y in zip(lo, hi, ys)]
            row[f"coverage_{lv}"] = np.mean([l <= y <= u for l, u, y in zip(lo, hi, ys)])
            row[f"width_{lv}"] = np.mean([u - l for l, u in zip(lo, hi)])
            row[f"interval_score_{lv}"] = np.mean(iss)
            scaled = [s / c["q"] for s, c in zip(iss, hit) if c["q"] is not None]
            row[f"msis_{lv}"] = np.mean(scaled) if scaled else np.nan
        pin = []
        for c in g:
            for tau, col in ((0.1, "q10"), (0.9, "q90")):
                if col in c["row"] and not pd.isna(c["row"][col]):
                    qv = c["row"][col]
                    pin.append(tau * (c["y"] - qv) if c["y"] >= qv else (1 - tau) * (qv - c["y"]))
        if pin:
            row["pinball"] = np.mean(pin)
        row.update(oracle_wis(g))
        out[key] = row
    return out


def _cell_wis(c):
    """(wis, dispersion, over, under) of one cell from the definition (Bracher et al. 2021, eq. 3), or None.

    Intervals: the q10/q90 pair (alpha 0.2), then each bound level whose alpha the quantiles do
    not already give; the median is q50, else the point forecast.
    """
    r, y = c["row"], c["y"]
    ivals = {}
    if not pd.isna(r.get("q10", np.nan)) and not pd.isna(r.get("q90", np.nan)):
        ivals[0.2] = (r["q10"], r["q90"])
    for lv in (80, 95):
        a = round(1 - lv / 100, 9)
        if a not in ivals and not pd.isna(r.get(f"lower_{lv}", np.nan)):
            ivals[a] = (r[f"lower_{lv}"], r[f"upper_{lv}"])
    if not ivals:
        return None
    m = c["f"]
    k = len(ivals) + 0.5
    disp = sum(a / 2 * (u - l) for a, (l, u) in ivals.items()) / k
    over = (0.5 * max(m - y, 0) + sum(max(l - y, 0) for l, _ in ivals.values())) / k
    under = (0.5 * max(y - m, 0) + sum(max(y - u, 0) for _, u in ivals.values())) / k
    return disp + over + under, disp, over, under


def oracle_wis(g):
    """Group means of the WIS columns, swis over scaled cells, crps_q = 2 x the cell's mean pinball."""
    parts = [(c, _cell_wis(c)) for c in g]
    parts = [(c, p) for c, p in parts if p is not None]
    if not parts:
        return {}
    out = {name: np.mean([p[i] for _, p in parts])
           for i, name in enumerate(("wis", "wis_dispersion", "wis_overprediction", "wis_underprediction"))}
    scaled = [p[0] / c["q"] for c, p in parts if c["q"] is not None]
    out["swis"] = np.mean(scaled) if scaled else np.nan
    crps = []
    for c in g:
        r = c["row"]
        if not pd.isna(r.get("q10", np.nan)):
            pin = [tau * (c["y"] - r[col]) if c["y"] >= r[col] else (1 - tau) * (r[col] - c["y"])
                   for tau, col in ((0.1, "q10"), (0.9, "q90"))]
            crps.append(2 * np.mean(pin))
    out["crps_q"] = np.mean(crps) if crps else np.nan
    return out


@pytest.fixture(scope="module", params=[1, 2])
def ledger_and_truth(tmp_path_factory, request):
    path = tmp_path_factory.mktemp("oracle") / "l.duckdb"
    return path, build(path, request.param)


@pytest.mark.parametrize("state", ["first", "now"])
@pytest.mark.parametrize("by", [("model", "horizon"), ("series", "model"), ("model",), ("series",)])
def test_scores_match_oracle(ledger_and_truth, state, by):
    path, truth = ledger_and_truth
    as_of, actual, runs = truth[state]
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.scores(by=list(by), as_of=as_of)
    want = oracle(oracle_cells(actual, runs), list(by))
    assert len(got) == len(want)
    for rec in got.to_dict("records"):
        expected = want[tuple(rec[k] for k in by)]
        for col, value in expected.items():
            assert col in rec, col
            if pd.isna(value):
                assert pd.isna(rec[col]), (col, rec[col])
            else:
                assert rec[col] == pytest.approx(value, rel=1e-9, abs=1e-12), col
        extra = {c for c in rec if c not in expected and c not in by and not pd.isna(rec[c])}
        assert not extra, extra


def test_column_order(ledger_and_truth):
    path, _ = ledger_and_truth
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.scores(by=["model", "horizon"])
    assert list(got.columns) == [
        "model", "horizon", "n", "mae", "rmse", "mape", "smape", "wape", "mase", "rmsse", "bias", "bias_pct",
        "coverage_80", "n_80", "width_80", "interval_score_80", "msis_80",
        "coverage_95", "n_95", "width_95", "interval_score_95", "msis_95", "pinball",
        "wis", "wis_dispersion", "wis_overprediction", "wis_underprediction", "swis", "crps_q",
        "n_zero_actual", "n_unscaled", "n_excluded"]


def test_filters(ledger_and_truth):
    path, truth = ledger_and_truth
    _, actual, runs = truth["now"]
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.scores(by=["model"], models=["beta"], series=["S1", "S2"], horizons=[2, 3],
                          since="2019Q3", until="2021Q2")
    cells = [c for c in oracle_cells(actual, runs) if c["model"] == "beta" and c["series"] in ("S1", "S2")
             and c["horizon"] in (2, 3) and "2019Q3" <= c["row"]["period"] <= "2021Q2"]
    want = oracle(cells, ["model"])[("beta",)]
    assert got["n"].tolist() == [want["n"]]
    assert got["mae"].iloc[0] == pytest.approx(want["mae"], rel=1e-12)
