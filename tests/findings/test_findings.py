"""Findings through the ledger: planted drift, miscalibrated intervals, value added, data quality.

Ledgers are built through the public API from seeded, invented data (tests/planted.py).
Measured figures are quoted beside the assertions; thresholds leave room for other seeds.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.stats.signals import TS_LIMIT, tracking_signal
from ledger.findings.calibration import bucket_labels
from ledger.errors import UnknownName
from ledger.findings.base import FINDING_COLUMNS, horizon_text
from ledger.findings.value import default_benchmark

from tests.planted import HISTORY, build, month

HONEST_SEEDS = (11, 12, 13, 14)


@pytest.fixture(scope="module")
def honest_flags(tmp_path_factory):
    """Drift and calibration findings of honest models (100 series, horizon 1, 80% and 95%) over four seeds."""
    out = {}
    for seed in HONEST_SEEDS:
        path = tmp_path_factory.mktemp(f"honest{seed}") / "l.duckdb"
        with build(path, n_series=100, seed=seed, models={"m": {"sigma": 5.0, "levels": (80, 95)}}) as book:
            out[seed] = (book.flags(kinds=["drift", "calibration"]), book.cells())
    return out


# ---------------------------------------------------------------- drift


def test_honest_drift_false_alarm_rate_over_seeds(honest_flags):
    # Issue 3: on honest forecasts the share of series flagged over a 36-period record stays at or
    # below 5%. Measured: 14 of 400 series (3.5%) over these four seeds; 17 of 600 (2.8%) over seeds 0-5.
    flagged = sum(f.loc[(f["kind"] == "drift") & (f["severity"] == "act"), "series"].nunique()
                  for f, _ in honest_flags.values())
    assert flagged / 400 <= 0.05, f"{flagged} of 400 honest series flagged"


def test_naive_tracking_signal_rule_would_flag_a_third(honest_flags):
    # The +-4 rule on a 12-cell window (common practice, no source) fires on about a third of the
    # same honest series (DESIGN.md); measured here 36% at the last cell. It is shown, never used.
    hits = total = 0
    for _, cells in honest_flags.values():
        for _, g in cells.groupby("series"):
            hits += abs(tracking_signal(g.sort_values("period_index")["e"].to_numpy(), window=12)) > TS_LIMIT
            total += 1
    assert 0.25 <= hits / total <= 0.5


def test_planted_level_shift_is_one_model_finding_dated_at_the_shift(tmp_path):
    # Forecasts stop following 8 of 40 series from target month HISTORY + 24 on (+3 sd, forecasts
    # too low). One change on many series of one model at one time: one model-level finding that
    # lists them, dated at the shift, raised soon after it.
    n, shifted = 40, [f"s{i:02d}" for i in range(8)]
    shift = np.zeros((n, HISTORY + 36))
    shift[:8, HISTORY + 24:] = 15.0
    with build(tmp_path / "l.duckdb", n_series=n, seed=5, models={"m": {"sigma": 5.0, "shift": shift}}) as book:
        found = book.flags(kinds=["drift"])
    acting = found[found["severity"] == "act"]
    model_level = acting[acting["series"] == ""]
    assert len(model_level) == 1
    row = model_level.iloc[0]
    listed = set(row["series_list"].split(", "))
    assert set(shifted) <= listed and len(listed - set(shifted)) <= 1
    assert len(acting[acting["series"] != ""]) <= 2  # about 5% of 32 honest series at most
    start = HISTORY + 24
    assert row["evidence"].startswith("forecasts too low on ")
    assert abs(_month_index(row["since"]) - start) <= 2
    assert 0 <= _month_index(row["raised"]) - start <= 4
    assert row["figure"] > 1.5  # MASE since the change well above MASE before it
    assert row["action_measure"] == "MAE after a constant correction" and row["action_figure"] > 0


def _month_index(label: str) -> int:
    return next(i for i in range(200) if month(i) == label)


# ---------------------------------------------------------------- calibration


def test_honest_intervals_are_rarely_flagged(honest_flags):
    # 80% and 95% intervals of an honest model, tested per bucket and per series (about 400 tests
    # a ledger) with Benjamini-Hochberg at 5%. Measured: no finding in any of the four ledgers
    # (nor in seeds 0-5). At most one ledger in four may show one.
    counts = [int(((f["kind"] == "calibration") & (f["severity"] != "note")).sum()) for f, _ in honest_flags.values()]
    assert sum(c > 0 for c in counts) <= 1 and max(counts) <= 2, counts


@pytest.fixture(scope="module")
def interval_book(tmp_path_factory):
    # narrow: half-width 0.657 of the honest one, so 80% nominal intervals cover about 60%
    # (P(|Z| < 0.657 * 1.2816) = 0.60); wide: 1.6 times, covering about 96%.
    path = tmp_path_factory.mktemp("intervals") / "l.duckdb"
    models = {"honest": {"sigma": 5.0}, "narrow": {"sigma": 5.0, "width": 0.657}, "wide": {"sigma": 5.0, "width": 1.6}}
    book = build(path, n_series=20, horizons=(1, 2, 3), seed=7, models=models)
    yield book
    book.close()


@pytest.fixture(scope="module")
def interval_flags(interval_book):
    return interval_book.flags(kinds=["calibration"])


def test_too_narrow_and_too_wide_intervals_are_one_finding_per_model_and_level(interval_flags):
    f = interval_flags[interval_flags["severity"] != "note"]
    for model, check in (("narrow", "too narrow"), ("wide", "too wide")):
        rows = f[f["model"] == model]
        # one problem, one finding: every bucket and series of the model is evidence of one row
        assert len(rows) == 1, rows[["series", "horizons", "check"]]
        row = rows.iloc[0]
        assert (row["series"], row["horizons"], row["check"], row["zone"], row["severity"]) == (
            "", "1,2-3", check, "out of tolerance", "act")
        assert "series missing most at horizon 1: " in row["evidence"]
    narrow = f[f["model"] == "narrow"].iloc[0]
    assert narrow["figure"] == pytest.approx(0.60, abs=0.05)  # coverage of the narrow intervals
    # the factor that recalibrates: honest half-width / narrow one = 1 / 0.657 = 1.52
    assert narrow["action_figure"] == pytest.approx(1 / 0.657, rel=0.12)
    wide = f[f["model"] == "wide"].iloc[0]
    assert wide["action_figure"] == pytest.approx(1 / 1.6, rel=0.12) and wide["impact"] == 0
    assert f[f["model"] == "honest"].empty


def test_calibration_evidence_exact_text(tmp_path):
    # One series, 12 horizon-1 cells with 80% intervals, 9 actuals below them. Expected misses
    # 12 * 0.2 = 2.4 ("about 2"); P(X <= 9) > 99.99% for X ~ Bin(12, 0.2): out of tolerance.
    # Kupiec LR = 16.81 (p 4e-5); exact binomial p = P(X >= 9) = 6.2e-5; with the independence
    # test the family has two p-values, so BH doubles the smaller one: 1.2e-4.
    book = Ledger.open(tmp_path / "l.duckdb")
    periods = [f"2025-{m:02d}" for m in range(1, 13)] + [f"2026-{m:02d}" for m in range(1, 13)]
    book.record_actuals(pd.DataFrame({"series": "A", "period": periods, "actual": 100.0}))
    targets = periods[12:]
    miss = [True, True, False, True, True, True, False, True, True, False, True, True]
    book.snapshot(pd.DataFrame({"series": "A", "period": targets, "origin": periods[11:23],
                                "forecast": [110.0 if m else 100.0 for m in miss],
                                "lower_80": [105.0 if m else 95.0 for m in miss],
                                "upper_80": [115.0 if m else 105.0 for m in miss]}), model="m")
    found = book.flags(kinds=["calibration"], series_calibration=False)
    book.close()
    assert found["evidence"].tolist() == [
        "80% intervals missed 9 of 12 actuals since 2026-01; expected about 2; worst at horizon 1: 9 of 12, "
        "expected about 2 (too narrow: 9 below, 0 above; out of tolerance, Kupiec p < 0.0001, adjusted "
        "p 0.00012); series missing most at horizon 1: A (9 of 12)"]
    assert found.loc[0, "figure"] == pytest.approx(0.25)
    # Action, against numpy: |e| / half-width is 2 on the 9 misses (e = -10, half-width 5) and 0
    # on the 3 hits; the conformal factor is the ceil(13 * 0.8) = 11th smallest ratio = 2.
    ratio = np.sort(np.where(miss, 10.0 / 5.0, 0.0))
    assert found.loc[0, "action_figure"] == ratio[int(np.ceil(13 * 0.8)) - 1] == 2.0


def test_small_groups_are_not_judged(tmp_path):
    with build(tmp_path / "l.duckdb", n_series=1, n_targets=5, seed=3) as book:
        found = book.flags(kinds=["calibration"])
    assert found["severity"].tolist() == ["note", "note"]
    assert sorted(found["evidence"]) == [
        "80% intervals at horizon 1: 5 actuals since 2023-01; not enough data to judge (need 8)",
        "80% intervals not judged per series on 1 of 1 series: fewer than 8 cells each; not enough data to judge"]


def test_bucket_labels_and_horizon_text():
    assert list(bucket_labels([1, 2, 3, 4, 6, 7, 12, 13, 40], (1, 2, 4, 7, 13))) == [
        "1", "2-3", "2-3", "4-6", "4-6", "7-12", "7-12", "13+", "13+"]
    assert horizon_text([1]) == "horizon 1"
    assert horizon_text([3, 1, 2, 6, 8, 9]) == "horizons 1–3, 6, 8–9"


# ---------------------------------------------------------------- value added


@pytest.fixture(scope="module")
def value_ledger(tmp_path_factory):
    path = tmp_path_factory.mktemp("value") / "l.duckdb"
    models = {"good": {"sigma": 3.0}, "bad": {"sigma": 7.0}, "ref-snaive": {"sigma": 5.0}}
    book = build(path, n_series=20, horizons=(1, 2), seed=9, models=models)
    yield book
    book.close()


def test_value_added_against_the_default_benchmark(value_ledger):
    found = value_ledger.flags(kinds=["value"])
    model_level = found[found["series"] == ""]
    assert model_level["model"].tolist() == ["bad"]
    row = model_level.iloc[0]
    # 1 - 7/5 = -0.4 in expectation (MAE is proportional to sigma for normal errors)
    assert row["figure"] == pytest.approx(-0.4, abs=0.1)
    assert row["evidence"].startswith("no value added over ref-snaive in the last 12 evaluation periods (since ")
    assert "the benchmark is significantly more accurate (DM-HLN p" in row["evidence"]
    assert (found.loc[found["series"] != "", "model"] == "bad").all()


def test_value_added_other_benchmark_and_none(value_ledger):
    against_bad = value_ledger.flags(kinds=["value"], benchmark="bad")
    assert against_bad.empty  # good and ref-snaive both beat bad
    none = value_ledger.flags(kinds=["value"], models=["good"], benchmark="good")
    assert none.empty
    assert default_benchmark(["a", "b"]) is None
    assert default_benchmark(["x-Seasonal-Naive", "my-snaive", "ref-snaive"]) == "ref-snaive"
    assert default_benchmark(["x-seasonal-naive", "my-snaive"]) == "my-snaive"
    with pytest.raises(UnknownName, match="unknown model 'nope'; known models: bad, good, ref-snaive"):
        value_ledger.flags(kinds=["value"], benchmark="nope")


def test_no_benchmark_is_a_note(tmp_path):
    with build(tmp_path / "l.duckdb", n_series=2, n_targets=14, seed=1) as book:
        found = book.flags(kinds=["value"])
    assert found["evidence"].tolist() == [
        "value added not judged: no benchmark model (none is named like a seasonal-naive reference "
        "such as ref-snaive); pass --benchmark MODEL"]


# ---------------------------------------------------------------- data quality


def _months(first: str, last: str) -> list[str]:
    return [p.strftime("%Y-%m") for p in pd.period_range(first, last, freq="M")]


def _quality_ledger(path) -> Ledger:
    full = _months("2021-01", "2024-12")
    rng = np.random.default_rng(4)
    rows = []
    for name in ("gap", "zeros", "lumpy", "clean"):
        values = 50 + rng.normal(0, 3, len(full))
        if name == "zeros":
            values[[5, 17, 30]] = 0.0
        if name == "lumpy":
            values = np.where(np.arange(len(full)) % 3 == 2, values, 0.0)  # a demand every third month
        keep = [p not in ("2023-06", "2023-07") for p in full] if name == "gap" else [True] * len(full)
        rows.append(pd.DataFrame({"series": name, "period": np.array(full)[keep], "actual": values[keep]}))
    rows.append(pd.DataFrame({"series": "short", "period": _months("2023-09", "2024-12"), "actual": 10.0}))
    rows.append(pd.DataFrame({"series": "stopped", "period": _months("2021-01", "2024-06"), "actual": 20.0}))
    book = Ledger.open(path)
    book.record_actuals(pd.concat(rows))
    series = ["gap", "zeros", "lumpy", "clean", "short", "stopped", "never"]
    run = pd.DataFrame({"series": np.repeat(series, 3), "period": ["2024-09", "2024-10", "2024-11"] * len(series),
                        "forecast": 30.0})
    book.snapshot(run, model="m", origin="2024-08")
    return book


def test_data_quality_findings(tmp_path):
    with _quality_ledger(tmp_path / "l.duckdb") as book:
        found = book.flags(kinds=["data"])
        run_id = book.runs()["run_id"].iloc[0]
    got = sorted(zip(found["check"], found["series"], found["model"]))
    assert got == sorted([("gap", "gap", ""), ("zero actuals", "zeros", ""), ("zero actuals", "lumpy", ""),
                          ("intermittent demand", "lumpy", ""), ("short history", "short", ""),
                          ("no actuals", "never", "m"), ("overdue actuals", "", "m")])
    text = dict(zip(zip(found["check"], found["series"]), found["evidence"]))
    assert text[("gap", "gap")] == "no actual for 2023-06 to 2023-07 (2 periods) between recorded ones; reported, not filled in"
    assert text[("zero actuals", "zeros")] == "3 of 48 actuals are zero (first 2021-06); MAPE leaves those cells out"
    # ADI: 16 demands, the last in month 48, so 48 / 16 = 3.00 (Syntetos, Boylan & Croston 2005 cut 1.32)
    assert text[("intermittent demand", "lumpy")].startswith(
        "intermittent demand: 16 of 48 actuals are non-zero, average demand interval 3.00 periods (1.32 or more")
    assert text[("short history", "short")] == ("forecasts from 1 origin (2024-08) had fewer than 36 actuals of "
                                               "history (3 seasons of 12); the shortest had 12")
    assert text[("no actuals", "never")] == ("forecast in 1 run with 3 targets now due (2024-09 to 2024-11), "
                                             "but no actual has ever been recorded for this series")
    assert text[("overdue actuals", "")] == (f"run {run_id} (m at 2024-08): 3 forecasts for periods up to 2024-11 "
                                             "came due after their series' last actual and have none (series stopped)")


def test_model_filter_keeps_series_findings_of_that_model(tmp_path):
    with _quality_ledger(tmp_path / "l.duckdb") as book:
        book.snapshot(pd.DataFrame({"series": ["clean"], "period": ["2024-09"], "forecast": [1.0]}),
                      model="other", origin="2024-08")
        only_other = book.flags(kinds=["data"], models=["other"])
        with pytest.raises(UnknownName, match="unknown model 'zzz'; known models: m, other"):
            book.flags(models=["zzz"])
    assert only_other.empty  # the clean series has no data problem; the others are m's


# ---------------------------------------------------------------- frame and options


def test_flags_frame_columns_and_bad_options(value_ledger):
    found = value_ledger.flags(kinds=["value", "drift"])
    assert tuple(found.columns) == FINDING_COLUMNS
    assert list(FINDING_COLUMNS[:8]) == ["kind", "series", "model", "horizon", "level", "since", "figure", "evidence"]
    assert found["kind"].tolist() == sorted(found["kind"], key=["drift", "calibration", "quantiles", "value", "data"].index)
    with pytest.raises(UnknownName, match="unknown kind bias; use drift, calibration, quantiles, value, data"):
        value_ledger.flags(kinds=["bias"])
    with pytest.raises(UnknownName, match="unknown threshold drift_limit; known thresholds: drift_k, drift_h"):
        value_ledger.flags(drift_limit=4)
    with pytest.raises(UnknownName, match="correction 'bonferroni'"):
        value_ledger.flags(kinds=["calibration"], correction="bonferroni")


def test_holm_is_no_more_liberal_than_bh(interval_book, interval_flags):
    # Holm controls the family-wise error, BH the false-discovery rate: Holm's adjusted p-values
    # are never smaller, so its findings are a subset of BH's.
    holm = interval_book.flags(kinds=["calibration"], correction="holm")
    key = ["model", "series", "horizons", "level", "check"]
    found = lambda f: set(map(tuple, f.loc[f["severity"] != "note", key].astype(str).to_numpy()))
    assert found(holm) <= found(interval_flags)
    # the planted problems are strong enough for either: one finding per model (measured: 2 and 2)
    assert len(found(holm)) == 2 and len(found(interval_flags)) == 2


def test_counts_in_finding_text_carry_thousands_separators(tmp_path):
    # 1,500 daily actuals, 1,200 of them zero: the sentence reads as the CLI's counts do
    days = pd.date_range("2021-01-01", periods=1500, freq="D").strftime("%Y-%m-%d")
    values = np.where(np.arange(1500) < 1200, 0.0, 5.0)
    with Ledger.open(tmp_path / "l.duckdb") as book:
        book.record_actuals(pd.DataFrame({"series": "big", "period": days, "actual": values}), freq="daily")
        book.snapshot(pd.DataFrame({"series": ["big"], "period": ["2025-02-09"], "forecast": [1.0]}),
                      model="m", origin="2025-02-08", freq="daily")
        found = book.flags(kinds=["data"])
    text = dict(zip(found["check"], found["evidence"]))
    assert text["zero actuals"] == "1,200 of 1,500 actuals are zero (first 2021-01-01); MAPE leaves those cells out"
