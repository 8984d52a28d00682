"""The invented demo scenario (demo_history/) and its replay into a ledger (ledger.demo).

The generator must rebuild the committed files byte for byte; its Holt-Winters must be the one
statsmodels computes; no forecast may see data after its origin; and the replayed ledger must
show every planted problem in its plain scores.
"""

from __future__ import annotations

import importlib.util
import shutil
import subprocess
import sys
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger, LedgerError
from ledger.stats.demand import demand_interval_stats
from ledger.demo import DEMO_KEY, find_history, read_manifest, replay
from tests.helpers import REPO

HISTORY = REPO / "demo_history"
SOURCES = {"README.md", "generate.py"}  # written by hand, not by the generator


def _load_generator():
    spec = importlib.util.spec_from_file_location("demo_generate", HISTORY / "generate.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules[spec.name] = module  # dataclasses look their module up there
    spec.loader.exec_module(module)
    return module


gen = _load_generator()


def _data_files(folder: Path) -> dict[str, Path]:
    return {p.relative_to(folder).as_posix(): p for p in sorted(folder.rglob("*"))
            if p.is_file() and p.name not in SOURCES and "__pycache__" not in p.parts}


@pytest.fixture(scope="module")
def demo(demo_site):
    _, result = demo_site            # the session's one replay (tests/conftest.py)
    book = Ledger.open(result.replay.ledger_path, create=False, read_only=True)
    yield result.replay, book
    book.close()


N_SERIES = len(gen.REGIONS) * len(gen.FAMILIES)
N_ORIGINS = gen.LAST_ORIGIN - gen.FIRST_ORIGIN + 1
COAST = [f"{gen.SHIFT_REGION}/{f}" for f in gen.FAMILIES]


# ---------------------------------------------------------------------------------------------
# the generator


def test_generator_reproduces_the_committed_files(tmp_path):
    subprocess.run([sys.executable, str(HISTORY / "generate.py"), "--out", str(tmp_path)], check=True)
    made, committed = _data_files(tmp_path), _data_files(HISTORY)
    assert sorted(made) == sorted(committed)
    differ = [name for name in made if made[name].read_bytes() != committed[name].read_bytes()]
    assert differ == []


def test_the_folder_stays_small():
    total = sum(p.stat().st_size for p in HISTORY.rglob("*") if p.is_file())
    assert total < 3_000_000


def test_holt_winters_matches_statsmodels():
    # The generator's recursion and intervals against statsmodels' ETSModel with the same
    # weights and initial states (Hyndman et al. 2008 additive-error ETS(A,Ad,A)).
    from statsmodels.tsa.exponential_smoothing.ets import ETSModel

    origin = 70
    data = gen.known_at(gen.simulate(), origin)
    grid = gen.make_grid(gen.CHALLENGER_GRID)
    for _, fit in gen.hw_filter(data, grid, origin):
        pass
    pick, z, sse = gen._best(fit)
    ours = gen.hw_forecast(fit, grid, pick, z, sse / fit.n, origin, gen.TRUE_Z)
    for s in (0, 7):
        g = pick[s]
        y = pd.Series(data[s], index=pd.period_range("2018-01", periods=origin + 1, freq="M"))
        model = ETSModel(y, error="add", trend="add", damped_trend=True, seasonal="add", seasonal_periods=12,
                         initialization_method="known", initial_level=z[s, 0], initial_trend=z[s, 1],
                         initial_seasonal=np.r_[z[s, 2:], -z[s, 2:].sum()])
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            result = model.smooth([grid.alpha[g], grid.beta[g], grid.gamma[g], grid.phi[g]])
            frame = result.get_prediction(start=origin + 1, end=origin + 12).summary_frame(alpha=0.2)
        np.testing.assert_allclose(ours["forecast"][s], frame["mean"].to_numpy(), rtol=1e-9)
        np.testing.assert_allclose(ours["upper_80"][s], frame["pi_upper"].to_numpy(), rtol=1e-9)
        assert result.sse == pytest.approx(sse[s], rel=1e-9)


def test_no_forecast_sees_data_after_its_origin():
    truth = gen.simulate()
    cut = 80
    spoiled = {k: np.where(np.arange(v.size) > cut, v * 3 + 50, v) for k, v in truth.items()}
    for make in (gen.incumbent_runs, gen.challenger_runs, gen.snaive_runs):
        before, after = make(truth), make(spoiled)
        for origin in range(gen.FIRST_ORIGIN, cut + 1):
            for key in before[origin]:
                np.testing.assert_array_equal(before[origin][key], after[origin][key])
        assert not np.array_equal(before[cut + 1]["forecast"], after[cut + 1]["forecast"])


# ---------------------------------------------------------------------------------------------
# the replay


def test_replay_counts(demo):
    summary, book = demo
    # 4 sources x one run per origin, plus the planner's one superseding correction;
    # each run holds every series x 12 horizons.
    assert summary.runs == 4 * N_ORIGINS + 1
    assert summary.cells == summary.runs * N_SERIES * gen.H
    # every series x month, less the three-month gap in one series; one value revised once
    assert summary.actual_values == N_SERIES * gen.N_MONTHS - len(gen.GAP_MONTHS)
    assert summary.revisions == 1
    assert summary.superseded == 1
    assert summary.steps == len(read_manifest(HISTORY))
    assert summary.warnings == ()
    runs = book.runs()
    assert len(runs) == summary.runs
    assert runs["superseded_by"].notna().sum() == 1
    assert book.store.get_setting(DEMO_KEY) == summary.scenario
    assert book.incumbent == "incumbent-hw"


def test_scores_exist_for_all_four_models(demo):
    _, book = demo
    table = book.scores(by=["model"])
    assert sorted(table["model"]) == ["challenger-damped", "incumbent-hw", "planner-override", "seasonal-naive"]
    assert (table["n"] > 0).all()


def test_the_revision_is_kept_and_backdated(demo):
    _, book = demo
    rows = book.store.con.execute(
        "SELECT revision, value, recorded_at FROM actuals WHERE series = ? AND period = ? ORDER BY revision",
        [gen.REVISED_SERIES, gen.first_day(gen.REVISED_MONTH)]).fetchall()
    assert [r[0] for r in rows] == [1, 2]
    assert rows[0][1] != rows[1][1]
    assert rows[0][1] == pytest.approx(round(rows[1][1] * gen.PRELIMINARY_FACTOR))
    target = gen.label(gen.REVISED_MONTH)

    def seen(as_of):
        cells = book.cells(as_of=as_of, series=[gen.REVISED_SERIES], models=["incumbent-hw"], since=target, until=target)
        return set(cells["actual"])

    # the ledger's answer at the end of April 2025 used the first publication, today's the revision
    assert seen("2025-04-30") == {rows[0][1]}
    assert seen(None) == {rows[1][1]}


def test_the_gap_periods_have_no_actuals(demo):
    _, book = demo
    periods = {r[0] for r in book.store.con.execute(
        "SELECT strftime(period, '%Y-%m') FROM actuals WHERE series = ?", [gen.GAP_SERIES]).fetchall()}
    missing = {gen.label(t) for t in gen.GAP_MONTHS}
    assert missing.isdisjoint(periods)
    assert {gen.label(min(gen.GAP_MONTHS) - 1), gen.label(max(gen.GAP_MONTHS) + 1)} <= periods


def test_the_intermittent_family_has_zeros_and_a_long_demand_interval(demo):
    _, book = demo
    for region in gen.REGIONS:
        key = f"{region}/{gen.INTERMITTENT}"
        y = book.store.con.execute("SELECT value FROM (SELECT *, row_number() OVER (PARTITION BY period "
                                   "ORDER BY revision DESC) rn FROM actuals WHERE series = ?) WHERE rn = 1 "
                                   "ORDER BY period", [key]).df()["value"].to_numpy()
        stats = demand_interval_stats(y)
        assert (y == 0).sum() > y.size / 3
        # intermittent above ADI 1.32: Syntetos, Boylan & Croston (2005), JORS 56, 495-503
        assert stats.adi >= 1.32 * 1.5


def test_incumbent_intervals_are_too_narrow(demo):
    _, book = demo
    table = book.scores(by=["model"]).set_index("model")
    assert table.loc["incumbent-hw", "coverage_80"] < 0.7
    assert table.loc["incumbent-hw", "coverage_95"] < 0.85
    # the challenger's own intervals are much nearer their nominal levels
    for level in (80, 95):
        gap = {m: abs(table.loc[m, f"coverage_{level}"] - level / 100) for m in ("incumbent-hw", "challenger-damped")}
        assert gap["challenger-damped"] < gap["incumbent-hw"] / 2


def test_the_override_is_optimistic(demo):
    _, book = demo
    table = book.scores(by=["model"]).set_index("model")
    # e = actual - forecast: negative bias_pct means forecasts too high
    assert table.loc["planner-override", "bias_pct"] < -5
    assert table.loc["planner-override", "mae"] > table.loc["incumbent-hw", "mae"]


def test_challenger_beats_incumbent_after_the_shift(demo):
    _, book = demo
    since = gen.label(gen.SHIFT_FROM)
    after = book.scores(by=["model"], series=COAST, since=since).set_index("model")
    assert after.loc["challenger-damped", "mae"] < 0.85 * after.loc["incumbent-hw", "mae"]
    assert after.loc["incumbent-hw", "bias_pct"] < -10  # it keeps forecasting the old, higher level
    elsewhere = [k for k in gen.SERIES if k not in COAST]
    calm = book.scores(by=["model"], series=elsewhere, since=since).set_index("model")
    assert abs(calm.loc["incumbent-hw", "bias_pct"]) < 5


# ---------------------------------------------------------------------------------------------
# replay safety


def _mini_history(folder: Path) -> Path:
    """The first two steps of the demo (history actuals and one run), for quick replays."""
    folder.mkdir()
    lines = (HISTORY / "manifest.csv").read_text(encoding="utf-8").splitlines()[:3]
    (folder / "manifest.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    for step in read_manifest(folder):
        target = folder / step.file
        target.parent.mkdir(parents=True, exist_ok=True)
        shutil.copy(HISTORY / step.file, target)
    return folder


def test_replay_replaces_an_earlier_demo_ledger(tmp_path):
    history = _mini_history(tmp_path / "mini")
    path = tmp_path / "demo.duckdb"
    first = replay(history, path)
    second = replay(history, path)
    assert (first.runs, first.actual_values) == (second.runs, second.actual_values) == (1, N_SERIES * 60)


def test_replay_refuses_a_ledger_that_is_not_a_demo(tmp_path):
    history = _mini_history(tmp_path / "mini")
    path = tmp_path / "mine.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(HISTORY / "actuals" / "2023-01.csv")
    before = path.read_bytes()
    with pytest.raises(LedgerError, match="refusing to overwrite .*mine.duckdb: it is not a demo ledger"):
        replay(history, path)
    assert path.read_bytes() == before


def test_replay_refuses_a_file_that_is_not_a_ledger(tmp_path):
    history = _mini_history(tmp_path / "mini")
    path = tmp_path / "notes.txt"
    path.write_text("not a ledger\n", encoding="utf-8")
    with pytest.raises(LedgerError, match="it is not a demo ledger"):
        replay(history, path)
    assert path.read_text(encoding="utf-8") == "not a ledger\n"


def test_find_history_is_the_checkout_folder():
    assert find_history() == HISTORY


def test_manifest_out_of_order_is_refused(tmp_path):
    history = _mini_history(tmp_path / "mini")
    lines = (history / "manifest.csv").read_text(encoding="utf-8").splitlines()
    lines[1] = lines[1].replace("2023-01-02T07:00:00", "2023-01-04T07:00:00")
    (history / "manifest.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    with pytest.raises(LedgerError, match="step 2: arrived 2023-01-03T08:00:00 is not after step 1"):
        read_manifest(history)


def test_challenger_quantiles_are_its_normal_quantiles_with_planted_thin_tails():
    # q25/q50/q75 are its normal predictive quantiles: point + Phi^-1(tau) sd, with sd read back
    # from its 80% bound (z = 1.2816); the tails sit at 1.0 and 1.15 sd (planted, README).
    run = pd.read_csv(HISTORY / "runs" / "challenger-damped" / "2024-06.csv")
    run = run[run["lower_95"] > 0]                                      # no flooring at 0
    sd = (run["upper_80"] - run["forecast"]) / 1.2815515655446004
    for col, z in (("q25", -0.6745), ("q50", 0.0), ("q75", 0.6745), ("q10", -1.0), ("q95", 1.15)):
        np.testing.assert_allclose(run[col], run["forecast"] + z * sd, atol=0.1 + 0.0005 * sd.max())
    assert len(run) > 100
