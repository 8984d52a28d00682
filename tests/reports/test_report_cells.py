"""What the report counts: a coverage over fewer than all scored cells is marked and its n_L is in
the CSVs (issue 20 item 2), and events' exclusions are honoured exactly as ``scores`` honours them,
with ``--include-excluded`` putting the cells back (issue 19 item 3).

Invented ledger: six monthly series, two models; model-b sends 80% bounds for three of its six
series only; an event excludes five months of one series. The oracle is a numpy count over the
input frames.
"""

from __future__ import annotations

import csv
import html
import io
import re

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from reports import render_report

AS_OF = "2100-01-01"
SERIES = [f"s{i}" for i in range(6)]
WITH_BOUNDS_B = set(SERIES[:3])               # model-b's bounds: half its series
EXCLUDED = ("s4", "2025-03", "2025-07")       # an event that leaves these cells out
MONTHS = [str(p) for p in pd.period_range("2023-01", periods=36, freq="M")]
N_ACTUALS = 32
HORIZONS = (1, 2, 3)


def _frames() -> tuple[pd.DataFrame, pd.DataFrame]:
    rng = np.random.default_rng(20)
    truth = {s: 100 + 15 * np.sin(np.arange(36) * 2 * np.pi / 12) + rng.normal(0, 4, 36) for s in SERIES}
    rows = []
    for s in SERIES:
        for o in range(14, 33):
            for h in HORIZONS:
                t = o + h
                if t >= 36:
                    continue
                for model, noise in (("model-a", 3.0), ("model-b", 5.0)):
                    f = round(float(truth[s][t - 12] + rng.normal(0, noise)), 2)
                    row = {"series": s, "model": model, "origin": MONTHS[o], "period": MONTHS[t], "forecast": f}
                    if model == "model-a" or s in WITH_BOUNDS_B:
                        row |= {"lower_80": f - 6, "upper_80": f + 6}
                    rows.append(row)
    actuals = pd.DataFrame([{"series": s, "period": MONTHS[t], "actual": round(float(truth[s][t]), 2)}
                            for s in SERIES for t in range(N_ACTUALS)])
    return pd.DataFrame(rows), actuals


@pytest.fixture(scope="module")
def ledger_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("cells") / "invented.duckdb"
    runs, actuals = _frames()
    with Ledger.open(path) as book:
        book.snapshot(runs, name="invented-runs.csv")
        book.record_actuals(actuals, name="invented-actuals.csv")
        book.record_events(pd.DataFrame([{"series": EXCLUDED[0], "first": EXCLUDED[1], "last": EXCLUDED[2],
                                          "label": "invented stock-out", "exclude": "yes"}]), name="invented-events.csv")
    return path


@pytest.fixture(scope="module")
def oracle() -> pd.DataFrame:
    """Every scored cell (its actual has arrived) with whether it has bounds and whether the event excludes it."""
    runs, actuals = _frames()
    cells = runs.merge(actuals, on=["series", "period"])
    cells["h"] = [MONTHS.index(p) - MONTHS.index(o) for p, o in zip(cells["period"], cells["origin"])]
    cells["bounds"] = cells["lower_80"].notna()
    s, first, last = EXCLUDED
    cells["excluded"] = (cells["series"] == s) & (cells["period"] >= first) & (cells["period"] <= last)
    cells["inside"] = (cells["actual"] >= cells["lower_80"]) & (cells["actual"] <= cells["upper_80"])
    return cells


@pytest.fixture(scope="module")
def sites(ledger_file, tmp_path_factory):
    root = tmp_path_factory.mktemp("cells-sites")
    return {flag: render_report(ledger_file, root / f"site-{flag}", as_of=AS_OF, workers=0, include_excluded=flag).out_dir
            for flag in (False, True)}


def _csv(site, name: str) -> list[dict]:
    return list(csv.DictReader(io.StringIO((site / "tables" / name).read_text(encoding="utf-8"))))


def _text(page: str) -> str:
    return html.unescape(re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", page)))


@pytest.mark.parametrize("flag", [False, True])
def test_matrix_csv_counts_cells_and_cells_with_bounds(sites, oracle, ledger_file, flag):
    rows = {r["Model"]: r for r in _csv(sites[flag], "index-1.csv")}
    kept = oracle if flag else oracle[~oracle["excluded"]]
    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        scores = book.scores(by=["model", "horizon"], as_of=AS_OF, include_excluded=flag).set_index(["model", "horizon"])
    for model in ("model-a", "model-b"):
        for h in HORIZONS:
            mine = kept[(kept["model"] == model) & (kept["h"] == h)]
            got = rows[model]
            # numpy count of the input frames, and the same figures as scores (with the flag as given)
            assert int(got[f"h {h} n"]) == len(mine) == scores.loc[(model, h), "n"]
            assert int(got[f"h {h} n_80"]) == int(mine["bounds"].sum()) == scores.loc[(model, h), "n_80"]
            assert float(got[f"h {h} coverage_80"]) == pytest.approx(100 * mine.loc[mine["bounds"], "inside"].mean(), rel=1e-9)
            assert float(got[f"h {h} coverage_80"]) == pytest.approx(100 * scores.loc[(model, h), "coverage_80"], rel=1e-9)
    # model-b's bounds cover half its series: fewer cells with bounds than cells
    assert all(int(rows["model-b"][f"h {h} n_80"]) < int(rows["model-b"][f"h {h} n"]) for h in HORIZONS)
    assert all(int(rows["model-a"][f"h {h} n_80"]) == int(rows["model-a"][f"h {h} n"]) for h in HORIZONS)


def test_partial_coverage_is_marked_with_its_counts(sites, oracle):
    index = (sites[False] / "index.html").read_text(encoding="utf-8")
    matrix = index[index.index('<section id="matrix"'):index.index('</section>', index.index('<section id="matrix"'))]
    b_row = re.search(r'<tr><td[^>]*><a [^>]*>model-b</a>.*?</tr>', matrix, re.S).group(0)
    a_row = re.search(r'<tr><td[^>]*><a [^>]*>model-a</a>.*?</tr>', matrix, re.S).group(0)
    assert len(re.findall(r"80% \w+[?!]?\*", _text(b_row))) == len(HORIZONS)      # one partial mark per column
    assert "*" not in _text(a_row)
    kept = oracle[~oracle["excluded"] & (oracle["model"] == "model-b")]
    note = f"* model-b: 80% coverage over {int(kept['bounds'].sum()):,} of {len(kept):,} scored cells"
    assert note in _text(matrix)
    model_page = next(p for p in sites[False].glob("m-model-b-*.html"))
    text = _text(model_page.read_text(encoding="utf-8"))
    for h in HORIZONS:
        mine = kept[kept["h"] == h]
        assert f"over {int(mine['bounds'].sum()):,} of {len(mine):,} cells" in text
    page_csv = _csv(sites[False], model_page.stem + "-1.csv")
    assert [int(r["n_80"]) for r in page_csv] == [int(kept.loc[kept["h"] == h, "bounds"].sum()) for h in HORIZONS]
    # a series page: model-b has no bounds on s5, so its coverage is blank and n_80 is 0
    series_page = next(p for p in sites[False].glob("s-s5-*.html"))
    rows = {r["Model"]: r for r in _csv(sites[False], series_page.stem + "-1.csv")}
    assert rows["model-b"]["n_80"] == "0" and int(rows["model-a"]["n_80"]) == int(rows["model-a"]["n"])


def test_excluded_cells_are_out_and_counted_by_default_and_in_with_the_flag(sites, oracle):
    excluded = int(oracle["excluded"].sum())
    assert excluded > 0
    first = {flag: _text((sites[flag] / "index.html").read_text(encoding="utf-8")) for flag in sites}
    scored = {flag: int(re.search(r"Forecasts scored ([\d,]+)", first[flag]).group(1).replace(",", "")) for flag in sites}
    assert scored[True] - scored[False] == excluded and scored[True] == len(oracle)
    assert f"{excluded:,} left out by events (--include-excluded scores them)" in first[False]
    assert "cells of excluding events included (--include-excluded)" in first[True]


def test_report_cli_takes_include_excluded(runner, ledger_file, tmp_path):
    from ledger.cli import report as cli_report  # noqa: F401
    from ledger.cli.common import app

    done = runner.invoke(app, ["--ledger", str(ledger_file), "report", str(tmp_path / "out"), "--as-of", AS_OF,
                               "--include-excluded"])
    assert done.exit_code == 0, done.stderr
    assert "cells of excluding events included" in _text((tmp_path / "out" / "index.html").read_text(encoding="utf-8"))


def test_series_pages_cap_keeps_every_page_a_finding_names(ledger_file, oracle, tmp_path, runner):
    """With more series than the cap, pages are drawn for the largest total scaled error and for
    every series an act or watch finding names; the index lists every series and says so; no link is dead."""
    from ledger.cli import report as cli_report  # noqa: F401
    from ledger.cli.common import app
    from reports.site import SERIES_PAGES

    result = render_report(ledger_file, tmp_path / "site", as_of=AS_OF, workers=0, series_pages=2)
    site = result.out_dir
    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        flags = book.flags(as_of=AS_OF)
        named = set(flags.loc[flags["severity"] != "note", "series"]) - {""}
        per = book.scores(by=["series", "model"], as_of=AS_OF)
    weight = (per["mase"].fillna(0) * (per["n"] - per["n_unscaled"])).groupby(per["series"]).sum()
    top = set(weight.sort_values(ascending=False, kind="stable").index[:2])
    drawn = {r["Series"] for r in _csv(site, "series-1.csv")}
    assert drawn == set(SERIES)                                   # the index lists every series
    pages = list(site.glob("s-*.html"))
    assert len(pages) == result.series_pages == len(top | named) < len(SERIES)
    index = (site / "series.html").read_text(encoding="utf-8")
    assert f"Pages are drawn for {len(top | named)} of these {len(SERIES)} series" in _text(index)
    for page in site.glob("*.html"):                              # every link to a series page resolves
        for href in re.findall(r'href="(s-[^"]+\.html)"', page.read_text(encoding="utf-8")):
            assert (site / href).is_file(), (page.name, href)
    assert f"default {SERIES_PAGES}" in runner.invoke(app, ["report", "--help"]).stdout
    bad = runner.invoke(app, ["--ledger", str(ledger_file), "report", str(tmp_path / "x"), "--series-pages", "0"])
    assert bad.exit_code == 2 and "--series-pages" in bad.stderr
