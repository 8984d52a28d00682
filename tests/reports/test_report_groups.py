"""The report's groups page (``render_report(..., group_by=ATTR)``, ``backsight report --group-by ATTR``).

The ledger here is invented data (no real company or series): six monthly series, two models,
attributes with a ``region`` each, hostile region values (``<b>x</b>``, ``../..``), one series
with other attributes but no region, a missing actual in a member (so a region total leaves
periods out), a group with few cells (small-sample label) and a planted bias (so there are
findings to count). The page's numbers are checked against the ledger's own group API
(``Ledger.scores(by=["region", "model"], weight="volume")``, ``Ledger.totals("region")``,
``Ledger.flag_counts("region")``), which tests/test_groups.py checks against hand-worked
values and pandas oracles.
"""

from __future__ import annotations

import html.parser
from pathlib import Path

import markupsafe
import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from ledger.store import parse_as_of
from ledger.scoring.totals import INTERVAL_NOTE
from reports import render_report
from reports.group_views import GROUPS_PAGE, NO_GROUP, build_groups, count_findings, load_groups
from reports.names import MARKER, page_name
from ledger.wording import num, pct
from reports.text import bias_words
from tests.helpers import record_invented
from tests.reports.test_report import _parse, check_links

AS_OF = "2100-01-01"     # after every recorded time (recorded_at is the wall clock of the test run)
MODELS = ("steady", "tilted")
REGIONS = {"n/one": "North", "n/two": "North", "b/one": "<b>x</b>", "b/two": "<b>x</b>",
           "dots/one": "../..", "loose/one": None}
BIASED = "n/two"          # planted: "tilted" forecasts far too low on it from origin 40 on
FEW = "dots/one"          # forecast at two origins only: its group is a small sample
GAP = ("b/two", 50)       # a member's missing actual: the <b>x</b> total leaves those cells out


def _forecasts(key: str, truth: np.ndarray, months: pd.PeriodIndex, level: float, rng) -> list[dict]:
    rows = []
    origins = range(13, 15) if key == FEW else range(13, 57)
    for o in origins:
        for h in (1, 2, 3):
            t = o + h
            mean = level * (1 + 0.2 * np.sin(2 * np.pi * t / 12))
            push = -0.3 * level if key == BIASED and o >= 40 else 0.0
            points = {"steady": mean + rng.normal(0, 0.03 * level),
                      "tilted": mean + rng.normal(0, 0.06 * level) + push}
            rows += [{"series": key, "model": m, "origin": str(months[o]), "period": str(months[t]),
                      "forecast": round(float(p), 3)} for m, p in points.items()]
    return rows


def build_group_ledger(path: Path, seed: int = 20261207) -> Path:
    """60 months of actuals (2022-01 to 2026-12) for six series; origins 2023-02 to 2026-09, h = 1-3."""
    rng = np.random.default_rng(seed)
    months = pd.period_range("2022-01", periods=64, freq="M")
    actuals, forecasts = [], []
    for i, key in enumerate(REGIONS):
        level = 50.0 * (i + 1)
        truth = level * (1 + 0.2 * np.sin(2 * np.pi * np.arange(61) / 12)) + rng.normal(0, 0.04 * level, 61)
        forecasts += _forecasts(key, truth, months, level, rng)
        actuals += [{"series": key, "period": str(months[t]), "actual": round(float(truth[t]), 3)}
                    for t in range(60) if (key, t) != GAP]
    attrs = pd.DataFrame({"series": list(REGIONS), "region": [v or "" for v in REGIONS.values()],
                          "family": ["tools"] * len(REGIONS)})
    return record_invented(path, forecasts, actuals, attrs)


@pytest.fixture(scope="module")
def ledger_file(tmp_path_factory) -> Path:
    return build_group_ledger(tmp_path_factory.mktemp("groups") / "invented.duckdb")


@pytest.fixture(scope="module")
def site(ledger_file, tmp_path_factory):
    out = tmp_path_factory.mktemp("site") / "out"
    result = render_report(ledger_file, out, as_of=AS_OF, group_by="region", workers=0)
    return result, {p.name: p.read_text(encoding="utf-8") for p in out.glob("*.html")}


@pytest.fixture(scope="module")
def api(ledger_file):
    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        return {"scores": book.scores(by=["region", "model"], weight="volume", as_of=AS_OF),
                "totals": book.totals("region", as_of=AS_OF),
                "flag_counts": book.flag_counts("region", as_of=AS_OF),
                "attributes": book.attributes(as_of=AS_OF)}


class _Tables(html.parser.HTMLParser):
    """The text of every cell of the table with a given id, row by row (header rows left out)."""

    def __init__(self, table_id: str):
        super().__init__()
        self.table_id, self.inside, self.in_body, self.rows, self.cell = table_id, False, False, [], None

    def handle_starttag(self, tag, attrs):
        if tag == "table" and dict(attrs).get("id") == self.table_id:
            self.inside = True
        elif self.inside and tag == "tbody":
            self.in_body = True
        elif self.in_body and tag == "tr":
            self.rows.append([])
        elif self.in_body and tag == "td":
            self.cell = []

    def handle_endtag(self, tag):
        if tag == "td" and self.cell is not None:
            self.rows[-1].append(" ".join("".join(self.cell).split()))
            self.cell = None
        elif tag == "table":
            self.inside = self.in_body = False

    def handle_data(self, data):
        if self.cell is not None:
            self.cell.append(data)


def _rows(text: str, table_id: str) -> list[list[str]]:
    p = _Tables(table_id)
    p.feed(text)
    return p.rows


def _group(value) -> str:
    return NO_GROUP if value is None or (not isinstance(value, str) and pd.isna(value)) else value


def _esc(text: str) -> str:
    """As the templates escape (Jinja2 autoescape uses markupsafe)."""
    return str(markupsafe.escape(text))


def _small(n: int) -> str:
    return f"{n} small sample" if n < 12 else str(n)


# ---------------------------------------------------------------- the page and its links


def test_groups_page_is_written_and_linked_from_every_page(site):
    result, pages = site
    assert GROUPS_PAGE in pages
    assert result.pages == len(pages) == 4 + 1 + len(MODELS) + len(REGIONS)
    for name, text in pages.items():
        assert f'<a href="{GROUPS_PAGE}"' in text, name
    assert f'<a href="{GROUPS_PAGE}" aria-current="page">Groups</a>' in pages[GROUPS_PAGE]
    ids = set(_parse(pages[GROUPS_PAGE]).ids)
    assert {"summary", "accuracy", "totals", "group-findings", "members", "c-groups-fig"} <= ids


def test_every_internal_link_resolves(site):
    result, pages = site
    check_links(result.out_dir, pages)


def test_each_group_lists_its_series_linked_to_their_pages(site, api):
    text = site[1][GROUPS_PAGE]
    attrs = api["attributes"]
    for value in set(REGIONS.values()):
        want = sorted(attrs.loc[attrs["region"].isna() if value is None else attrs["region"] == value, "series"])
        heading = _esc(_group(value))
        section = text[text.index(f'-h">{heading} <span'):]
        section = section[:section.index("</section>")]
        assert _parse(section).hrefs == [page_name("s", k) for k in want], value


# ---------------------------------------------------------------- the numbers are the ledger's


def test_accuracy_table_shows_the_ledger_scores(site, api):
    rows = _rows(site[1][GROUPS_PAGE], "accuracy-table")
    want = api["scores"]
    assert len(rows) == len(want) == 4 * len(MODELS)
    for got, (_, r) in zip(rows, want.iterrows()):
        assert got == [_group(r["region"]), r["model"], _small(int(r["n"])), pct(r["mape"]), num(r["mase"]),
                       pct(r["wape"]), bias_words(r["bias_pct"]), pct(r["wmape"]), num(r["wmase"]),
                       bias_words(r["wbias_pct"])]
    assert sum(g[2].endswith("small sample") for g in rows) == len(MODELS)     # the ../.. group, planted


def test_view_model_numbers_equal_the_api_to_full_precision(ledger_file, site, api):
    from reports.data import load
    from reports.site import build_context

    stamp = parse_as_of(AS_OF)
    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        data = load(book, as_of=stamp, since=None, until=None, horizon=1, incumbent=None, benchmark=None)
        groups = count_findings(book, load_groups(book, "Region", as_of=stamp, since=None, until=None),
                                data.findings.flags, stamp)
    view = build_groups(groups, build_context(data, "Invented"))
    for row, (_, r) in zip(view.rows, api["scores"].iterrows(), strict=True):
        assert (row.group, row.model, row.n) == (_group(r["region"]), r["model"], r["n"])
        for name in ("mape", "mase", "wape", "bias_pct", "wmape", "wmase", "wbias_pct", "weight_total"):
            assert getattr(row, name) == pytest.approx(r[name], rel=1e-12, nan_ok=True), name
    for row, (_, r) in zip(view.totals, api["totals"].iterrows(), strict=True):
        assert (row.group, row.model, row.n, row.n_left_out) == (r["region"], r["model"], r["n"], r["n_left_out"])
        assert row.mase == pytest.approx(r["mase"], rel=1e-12)
    assert view.weighting == api["scores"]["weighting"].iloc[0]


def test_weighting_is_stated_as_the_weighting_column_says(site, api):
    weighting = api["scores"]["weighting"].unique()
    assert len(weighting) == 1 and weighting[0].startswith("volume: ")
    assert f"weighting: {_esc(weighting[0])}." in site[1][GROUPS_PAGE]


def test_totals_table_shows_the_ledger_totals_and_why_intervals_are_not_scored(site, api):
    text = site[1][GROUPS_PAGE]
    rows = _rows(text, "totals-table")
    want = api["totals"]
    assert len(rows) == len(want) > 0
    for got, (_, r) in zip(rows, want.iterrows()):
        assert got == [r["region"], r["model"], r["forecast_of"], _small(int(r["n"])), pct(r["mape"]),
                       num(r["mase"]), pct(r["wape"]), bias_words(r["bias_pct"]), str(r["n_left_out"])]
    gap_group = REGIONS[GAP[0]]
    assert (want.loc[want["region"] == gap_group, "n_left_out"] > 0).all()       # the planted missing actual
    assert _esc(INTERVAL_NOTE) in text


def test_findings_per_group_and_kind_are_the_ledger_counts(site, api):
    rows = _rows(site[1][GROUPS_PAGE], "findings-table")
    counts = api["flag_counts"]
    want = counts.pivot_table(index="region", columns="kind", values="findings", aggfunc="sum", fill_value=0)
    assert len(rows) == len(want)
    for got, (group, r) in zip(rows, want.iterrows()):
        assert got == [group, *[str(int(r[k])) for k in sorted(want.columns)], str(int(r.sum()))]
    assert want.at[REGIONS[BIASED], "drift"] > 0, "the planted bias on a North series is counted under North"


def test_chart_is_an_accessible_figure_with_labelled_axes(site):
    text = site[1][GROUPS_PAGE]
    assert '<figure class="chart" id="c-groups-fig">' in text
    assert 'role="img"' in text and 'aria-describedby="c-groups-d"' in text
    caption = text[text.index('<figcaption id="c-groups-d">'):]
    caption = caption[:caption.index("</figcaption>")]
    assert "MASE by region and model" in caption and "volume-weighted MASE" in caption
    assert "North: steady" in caption
    assert "MASE (scaled error, lower is better)" in text and "region (attribute value)" in text


# ---------------------------------------------------------------- escaping, off by default, the CLI


def test_hostile_attribute_values_are_escaped(site):
    result, pages = site
    text = pages[GROUPS_PAGE]
    assert "<b>x</b>" not in text and "&lt;b&gt;x&lt;/b&gt;" in text
    assert "../.." in text
    for tag, attr, value in _parse(text).values:
        if attr in ("href", "id"):
            assert "../.." not in value and "<" not in value, (tag, attr, value)
    assert [p for p in result.out_dir.parent.iterdir()] == [result.out_dir]


def test_without_group_by_there_is_no_groups_page_and_no_link(ledger_file, tmp_path):
    result = render_report(ledger_file, tmp_path / "plain", as_of=AS_OF, workers=0)
    names = [p.name for p in result.out_dir.glob("*.html")]
    assert GROUPS_PAGE not in names and result.pages == len(names) == 4 + len(MODELS) + len(REGIONS)
    for name in names:
        assert GROUPS_PAGE not in (result.out_dir / name).read_text(encoding="utf-8"), name


def test_cli_group_by_writes_the_page_and_refuses_an_unknown_attribute(runner, ledger_file, tmp_path):
    from ledger.cli import report as cli_report  # noqa: F401  (registers the command on the shared app)
    from ledger.cli.common import app

    out = tmp_path / "cli"
    res = runner.invoke(app, ["--ledger", str(ledger_file), "report", str(out), "--as-of", AS_OF,
                              "--group-by", "region"])
    assert res.exit_code == 0, res.output
    assert (out / GROUPS_PAGE).is_file()
    bad = runner.invoke(app, ["--ledger", str(ledger_file), "report", str(tmp_path / "x"), "--as-of", AS_OF,
                              "--group-by", "zone"])
    assert bad.exit_code == 1
    assert bad.stderr == "Error: --group-by: no attribute named 'zone'; known attributes: family, region\n"
    assert not (tmp_path / "x" / GROUPS_PAGE).exists()
