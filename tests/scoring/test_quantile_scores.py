"""The probabilistic columns of ``scores`` (SQL) against ledger.stats.quantiles (pure functions).

Three models on one seeded monthly ledger: ``full`` sends 19 quantiles q05..q95 (median
included); ``mixed`` sends q10, q50, q90 and 80% and 95% bounds (its 80% interval comes from
the quantiles, its 95% from the bounds); ``bands`` sends 80% and 95% bounds only (its median is
the point forecast).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scoringrules as sr
from scipy import stats

from ledger import Ledger
from ledger.cli import app
from ledger.stats import quantiles as Q
from ledger.wording import quantile_name

TAUS = np.round(np.arange(1, 20) * 0.05, 2)
MONTHS = pd.period_range("2024-01", periods=30, freq="M")


def _name(tau):
    return quantile_name(tau)


@pytest.fixture(scope="module")
def book_and_cells(tmp_path_factory):
    rng = np.random.default_rng(2026)
    path = tmp_path_factory.mktemp("quantile-scores") / "l.duckdb"
    series = [f"s{i}" for i in range(4)]
    actual = {(s, m): float(rng.normal(100, 10)) for s in series for m in range(len(MONTHS))}
    cells = []
    book = Ledger.open(path)
    book.record_actuals(pd.DataFrame([{"series": s, "period": str(MONTHS[m]), "actual": v}
                                      for (s, m), v in actual.items()]), name="actuals.csv")
    for origin in range(14, 26):
        runs = {"full": [], "mixed": [], "bands": []}
        for s in series:
            for h in (1, 2, 3):
                t = origin + h
                mu, sd = float(rng.normal(100, 4)), float(rng.uniform(5, 15))
                q = mu + sd * stats.norm.ppf(TAUS)
                y = actual[(s, t)]
                key = {"series": s, "period": str(MONTHS[t]), "forecast": mu + float(rng.normal(0, 1))}
                runs["full"].append({**key, **{_name(tau): v for tau, v in zip(TAUS, q)}})
                l95, u95 = mu - 2.2 * sd, mu + 2.2 * sd
                mixed = {**key, "q10": q[1], "q50": q[9], "q90": q[17], "lower_80": q[1] - 3, "upper_80": q[17] + 3,
                         "lower_95": l95, "upper_95": u95}
                runs["mixed"].append(mixed)
                runs["bands"].append({**key, "lower_80": q[1], "upper_80": q[17], "lower_95": l95, "upper_95": u95})
                cells.append(dict(model="full", h=h, y=y, q=q, point=key["forecast"]))
                cells.append(dict(model="mixed", h=h, y=y, point=key["forecast"], med=q[9],
                                  lo=[q[1], l95], hi=[q[17], u95], alphas=[0.2, 0.05], qm=q[[1, 9, 17]]))
                cells.append(dict(model="bands", h=h, y=y, point=key["forecast"], med=key["forecast"],
                                  lo=[q[1], l95], hi=[q[17], u95], alphas=[0.2, 0.05]))
        for model, rows in runs.items():
            book.snapshot(pd.DataFrame(rows), model=model, origin=str(MONTHS[origin]), name=f"{model}.csv")
    book.close()
    return path, cells


def _expected(cells, model):
    mine = [c for c in cells if c["model"] == model]
    y = np.array([c["y"] for c in mine])
    if model == "full":
        q = np.array([c["q"] for c in mine])
        parts = Q.wis_from_quantiles(y, q, taus=TAUS)
        crps = Q.quantile_crps(y, q, taus=TAUS).mean()
    else:
        parts = Q.weighted_interval_score(y, [c["med"] for c in mine], [c["lo"] for c in mine],
                                          [c["hi"] for c in mine], alphas=mine[0]["alphas"])
        crps = (Q.quantile_crps(y, np.array([c["qm"] for c in mine]), taus=[0.1, 0.5, 0.9]).mean()
                if model == "mixed" else np.nan)
    return {"wis": parts.wis.mean(), "wis_dispersion": parts.dispersion.mean(),
            "wis_overprediction": parts.overprediction.mean(),
            "wis_underprediction": parts.underprediction.mean(), "crps_q": crps}


@pytest.mark.parametrize("model", ["full", "mixed", "bands"])
def test_wis_columns_match_the_pure_functions(book_and_cells, model):
    path, cells = book_and_cells
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.scores(by=["model"]).set_index("model").loc[model]
    for col, want in _expected(cells, model).items():
        if np.isnan(want):
            assert np.isnan(got[col]), col
        else:
            assert got[col] == pytest.approx(want, rel=1e-10), col
    assert got["wis"] == pytest.approx(got["wis_dispersion"] + got["wis_overprediction"]
                                       + got["wis_underprediction"], rel=1e-12)


def test_quantile_detail_columns(book_and_cells):
    path, cells = book_and_cells
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.scores(by=["model", "horizon"], quantile_detail=True)
        plain = book.scores(by=["model", "horizon"])
    assert not any(c.startswith("below_") for c in plain.columns)
    names = [_name(t) for t in TAUS]
    assert [c for c in got.columns if c.startswith("below_")] == [f"below_{n}" for n in names]
    row = got[(got["model"] == "full") & (got["horizon"] == 2)].iloc[0]
    mine = [c for c in cells if c["model"] == "full" and c["h"] == 2]
    y, q = np.array([c["y"] for c in mine]), np.array([c["q"] for c in mine])
    shares = Q.below_shares(y, q, taus=TAUS)
    e = y[:, None] - q
    pinball = np.maximum(TAUS * e, (TAUS - 1) * e).mean(axis=0)
    # scoringrules 0.10.0 quantile_score (the pinball loss), level by level
    outside = [float(np.mean(sr.quantile_score(y, q[:, i], float(t), backend="numpy"))) for i, t in enumerate(TAUS)]
    np.testing.assert_allclose(pinball, outside, rtol=1e-12)
    for i, n in enumerate(names):
        assert row[f"below_{n}"] == pytest.approx(shares[i], abs=1e-12)
        assert row[f"pinball_{n}"] == pytest.approx(pinball[i], rel=1e-10)
    bands = got[got["model"] == "bands"].iloc[0]
    assert np.isnan(bands["below_q10"]) and not np.isnan(bands["wis"])


def test_swis_divides_each_cell_by_its_scale(book_and_cells):
    path, _ = book_and_cells
    with Ledger.open(path, create=False, read_only=True) as book:
        cells = book.cells(models=["bands"])
        got = book.scores(by=["model"], models=["bands"]).iloc[0]
        bounds = book.interval_cells(models=["bands"])
    key = ["series", "origin_index", "period_index"]
    merged = cells
    for level in (80.0, 95.0):
        part = bounds.loc[bounds["level"] == level, key + ["lower", "upper"]]
        merged = merged.merge(part.rename(columns={"lower": f"l{level:g}", "upper": f"u{level:g}"}), on=key)
    assert len(merged) == len(cells)
    parts = Q.weighted_interval_score(
        merged["actual"].to_numpy(), merged["point"].to_numpy(), merged[["l80", "l95"]].to_numpy(),
        merged[["u80", "u95"]].to_numpy(), alphas=[0.2, 0.05])
    assert got["swis"] == pytest.approx(np.mean(parts.wis / merged["q"].to_numpy()), rel=1e-10)


def test_cells_with_blank_quantiles_pair_on_their_own_levels(tmp_path):
    # Most cells of a run send q10, q25, q50, q75, q90 and 80% bounds; some leave q90 blank (so
    # their 80% interval comes from the bounds), some leave q25 blank (no 50% interval).
    rng = np.random.default_rng(31)
    months = pd.period_range("2024-01", periods=14, freq="M")
    taus = [0.1, 0.25, 0.5, 0.75, 0.9]
    rows, want = [], []
    for i in range(60):
        s, t = f"s{i % 6}", 1 + i // 6
        mu, sd = float(rng.normal(100, 3)), 8.0
        q = {tau: mu + sd * float(stats.norm.ppf(tau)) for tau in taus}
        y = float(rng.normal(100, 9))
        row = {"series": s, "period": str(months[t]), "forecast": mu, "lower_80": mu - 12, "upper_80": mu + 12,
               **{_name(tau): v for tau, v in q.items()}}
        lo, hi, alphas = [q[0.1], q[0.25]], [q[0.9], q[0.75]], [0.2, 0.5]
        if i % 5 == 1:
            row["q90"] = None
            lo, hi = [mu - 12, q[0.25]], [mu + 12, q[0.75]]
        elif i % 5 == 2:
            row["q25"] = None
            lo, hi, alphas = [q[0.1]], [q[0.9]], [0.2]
        rows.append(row)
        p = Q.weighted_interval_score([y], [q[0.5]], [lo], [hi], alphas=alphas)
        want.append((s, str(months[t]), y, float(p.wis[0]), float(p.dispersion[0])))
    with Ledger.open(tmp_path / "l.duckdb") as book:
        book.record_actuals(pd.DataFrame([{"series": s, "period": m, "actual": y} for s, m, y, _, _ in want]
                                         + [{"series": f"s{k}", "period": str(months[0]), "actual": 100.0}
                                            for k in range(6)]), name="a.csv")
        book.snapshot(pd.DataFrame(rows), model="gappy", origin=str(months[0]), name="gappy.csv")
        got = book.scores(by=["model"]).iloc[0]
    assert got["n"] == 60
    assert got["wis"] == pytest.approx(np.mean([w for *_, w, _ in want]), rel=1e-10)
    assert got["wis_dispersion"] == pytest.approx(np.mean([d for *_, d in want]), rel=1e-10)


def test_cli_quantile_detail(book_and_cells, runner):
    path, _ = book_and_cells
    result = runner.invoke(app, ["--ledger", str(path), "scores", "--by", "model", "--quantile-detail",
                                 "--format", "csv"])
    assert result.exit_code == 0, result.output
    header = result.stdout.splitlines()[0].split(",")
    assert {"wis", "swis", "crps_q", "below_q05", "pinball_q95"} <= set(header)
