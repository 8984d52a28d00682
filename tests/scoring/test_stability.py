"""Forecast stability against a plain numpy loop over each target's successive forecasts."""

from __future__ import annotations

import io
import math
import shutil

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app
from ledger.periods import index_start, period_index

M = 4   # quarterly: season length 4
START = period_index(pd.Timestamp("2018-01-01").date(), "quarterly")


def _label(i: int) -> str:
    d = index_start(i, "quarterly")
    return f"{d.year}Q{(d.month - 1) // 3 + 1}"


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    rng = np.random.default_rng(11)
    path = tmp_path_factory.mktemp("stab") / "s.duckdb"
    actual = {(s, i): round(float(rng.normal(40, 8)), 1) for s in ("A", "B") for i in range(START, START + 26)}
    actual[("B", START + 20)] = actual[("B", START + 19)]   # a repeated value: some revisions may be 0
    runs = {}
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame([{"series": s, "period": _label(i), "actual": v}
                                          for (s, i), v in actual.items()]))
        for model in ("m1", "m2"):
            for origin in range(START + 5, START + 24):
                if model == "m2" and origin == START + 12:
                    continue   # a missing run: that revision spans two origins
                rows = []
                for s in ("A", "B"):
                    for h in (1, 2, 3, 4):
                        f = round(float(rng.normal(40, 6 if model == "m1" else 2)), 1)
                        if model == "m2" and h == 4 and s == "A":
                            f = 40.0   # identical forecasts: zero revisions, left out of toward and pairs
                        rows.append({"series": s, "period": _label(origin + h), "forecast": f})
                        runs[(model, s, origin, origin + h)] = f
                book.snapshot(pd.DataFrame(rows), model=model, origin=_label(origin))
    return path, actual, runs


def _scale(actual, series, origin):
    d = [abs(actual[(series, t)] - actual[(series, t - M)]) for t in range(START, origin + 1)
         if (series, t) in actual and (series, t - M) in actual]
    return np.mean(d) if d and np.mean(d) > 0 else None


def _oracle(actual, runs, model, series, excluded=frozenset()):
    """The figures of one series x model by plain loops; targets (series, t) in ``excluded`` are
    left out and their revisions counted in n_excluded."""
    rev, toward, flips = [], [], []
    n_rev = n_excluded = 0
    targets = sorted({t for (m, s, o, t) in runs if m == model and s == series})
    for t in targets:
        if (series, t) in excluded:
            n_excluded += sum(1 for (m, s, o, tt) in runs if m == model and s == series and tt == t) - 1
            continue
        path = sorted((o, f) for (m, s, o, tt), f in runs.items() if m == model and s == series and tt == t)
        r = [path[k][1] - path[k - 1][1] for k in range(1, len(path))]
        n_rev += len(r)
        for k in range(1, len(path)):
            q = _scale(actual, series, path[k][0])
            if q is not None:
                rev.append(abs(r[k - 1]) / q)
            y = actual.get((series, t))
            if y is not None and r[k - 1] != 0:
                toward.append(abs(y - path[k][1]) < abs(y - path[k - 1][1]))
        for k in range(1, len(r)):
            if r[k] * r[k - 1] != 0:
                flips.append(r[k] * r[k - 1] < 0)
    n_targets = sum(1 for t in targets if (series, t) not in excluded
                    and sum(1 for (m, s, o, tt) in runs if m == model and s == series and tt == t) > 1)
    return {"n_targets": n_targets, "n_revisions": n_rev, "revision": np.mean(rev), "toward": np.mean(toward),
            "nervousness": np.mean(flips), "n_toward": len(toward), "n_pairs": len(flips), "n_excluded": n_excluded}


def test_stability_matches_a_numpy_loop(small):
    path, actual, runs = small
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.stability()
    assert len(got) == 4
    for row in got.to_dict("records"):
        want = _oracle(actual, runs, row["model"], row["series"])
        for col, value in want.items():
            assert row[col] == pytest.approx(value, rel=1e-12), (row["model"], row["series"], col)
    a2 = got[(got["model"] == "m2") & (got["series"] == "A")].iloc[0]
    assert a2["n_toward"] < _oracle(actual, runs, "m2", "A")["n_revisions"]   # zero revisions were left out


def test_stability_by_model_pools_every_revision(small):
    path, actual, runs = small
    with Ledger.open(path, create=False, read_only=True) as book:
        by_model = book.stability(by=["model"]).set_index("model")
        by_h = book.stability(by=["model", "horizon"])
    pooled = _oracle(actual, runs, "m1", "A")["n_revisions"] + _oracle(actual, runs, "m1", "B")["n_revisions"]
    assert by_model.loc["m1", "n_revisions"] == pooled
    targets = _oracle(actual, runs, "m1", "A")["n_targets"] + _oracle(actual, runs, "m1", "B")["n_targets"]
    assert by_model.loc["m1", "n_targets"] == targets
    # every revision's later run is at horizon 1-3 (the first forecast of a target is at h = 4)
    assert sorted(by_h["horizon"].unique()) == [1, 2, 3]
    assert by_h.groupby("model")["n_revisions"].sum().to_dict() == by_model["n_revisions"].to_dict()


def test_forecast_paths_are_the_last_targets_run_by_run(small):
    path, actual, runs = small
    with Ledger.open(path, create=False, read_only=True) as book:
        paths = book.forecast_paths(last=3, models=["m1"], series=["A"])
    targets = sorted(paths["period_index"].unique())
    assert len(targets) == 3
    last_target = max(t for (m, s, o, t) in runs if m == "m1" and s == "A"
                      and sum(1 for k in runs if k[0] == "m1" and k[1] == "A" and k[3] == t) >= 2)
    assert targets[-1] == last_target
    for t in targets:
        want = sorted((o, f) for (m, s, o, tt), f in runs.items() if m == "m1" and s == "A" and tt == t)
        part = paths[paths["period_index"] == t]
        assert list(zip(part["origin_index"], part["point"])) == want
        y = actual.get(("A", t))
        assert (part["actual"].isna().all() if y is None else (part["actual"] == y).all())


# Events over the small ledger: A's targets START+10 .. START+12 and every series' START+18 are
# excluded; B's START+20 is only marked (exclude no), so it stays in.
EVENTS = pd.DataFrame({"series": ["A", "*", "B"], "first": [_label(START + 10), _label(START + 18), _label(START + 20)],
                       "last": [_label(START + 12), _label(START + 18), _label(START + 20)],
                       "label": ["stock-out", "shutdown", "promotion"], "exclude": ["yes", "yes", "no"]})
EXCLUDED = frozenset({("A", START + 10), ("A", START + 11), ("A", START + 12), ("A", START + 18), ("B", START + 18)})


@pytest.fixture(scope="module")
def with_events(small, tmp_path_factory):
    path, actual, runs = small
    copy = tmp_path_factory.mktemp("stab-events") / "s.duckdb"
    shutil.copy(path, copy)
    with Ledger.open(copy) as book:
        before = book.store.next_timestamp()
        book.record_events(EVENTS)
    return copy, before, actual, runs


def test_excluded_targets_are_left_out_of_stability(with_events):
    path, _, actual, runs = with_events
    with Ledger.open(path, create=False, read_only=True) as book:
        got = book.stability()
    assert len(got) == 4
    for row in got.to_dict("records"):
        want = _oracle(actual, runs, row["model"], row["series"], EXCLUDED)
        for col, value in want.items():
            assert row[col] == pytest.approx(value, rel=1e-12), (row["model"], row["series"], col)
    assert (got["n_excluded"] > 0).all()        # every series x model lost the revisions of some target


def test_include_excluded_and_as_of_put_the_targets_back(with_events):
    path, before, actual, runs = with_events
    with Ledger.open(path, create=False, read_only=True) as book:
        back = book.stability(include_excluded=True)
        then = book.stability(as_of=before)     # before the events were recorded
    for frame in (back, then):
        for row in frame.to_dict("records"):
            want = _oracle(actual, runs, row["model"], row["series"])
            for col, value in want.items():
                assert row[col] == pytest.approx(value, rel=1e-12), (row["model"], row["series"], col)


def test_a_group_whose_every_target_is_excluded_keeps_its_row(with_events, runner):
    path, *_ = with_events
    with Ledger.open(path, create=False, read_only=True) as book:
        by_h = book.stability(by=["series", "horizon"], since=_label(START + 18), until=_label(START + 18))
    # only target START+18 is selected, and it is excluded for both series
    assert by_h["n_revisions"].tolist() == [0] * len(by_h) and by_h["revision"].isna().all()
    assert by_h.groupby("series")["n_excluded"].sum().to_dict() == {"A": 6, "B": 6}   # 2 models x 3 revisions
    out = runner.invoke(app, ["--ledger", str(path), "stability", "--by", "model", "--format", "csv",
                              "--include-excluded"])
    assert out.exit_code == 0, out.output
    csv = pd.read_csv(io.StringIO(out.stdout))
    assert csv["n_excluded"].tolist() == [0, 0]
    assert csv["n_revisions"].tolist() == [sum(_oracle(*with_events[2:], m, s)["n_revisions"] for s in "AB")
                                           for m in ("m1", "m2")]
