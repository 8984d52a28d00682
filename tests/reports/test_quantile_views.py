"""The quantile section of the model pages: views from a seeded ledger, and the rendered HTML."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from ledger import Ledger
from reports.quantile_views import build_quantile_view, load_quantile_data
from reports.site import render_report

DECILES = np.round(np.arange(1, 10) / 10, 1)
NARROW = "narrow<&>"     # a model name that must be escaped in HTML


@pytest.fixture(scope="module")
def ledger_path(tmp_path_factory):
    rng = np.random.default_rng(8)
    path = tmp_path_factory.mktemp("quantile-report") / "l.duckdb"
    months = pd.period_range("2023-01", periods=40, freq="M")
    series = [f"s{i}" for i in range(5)]
    actual = {(s, m): float(rng.normal(100, 5)) for s in series for m in range(40)}
    z = stats.norm.ppf(DECILES)
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame([{"series": s, "period": str(months[m]), "actual": v}
                                          for (s, m), v in actual.items()]), name="a.csv")
        for origin in range(14, 38):
            rows = {"honest": [], NARROW: [], "bands": []}
            for s in series:
                for h in (1, 2):
                    key = {"series": s, "period": str(months[origin + h]), "forecast": 100.0}
                    rows["honest"].append({**key, **{f"q{round(t * 100):02d}": 100 + 5 * v for t, v in zip(DECILES, z)}})
                    rows[NARROW].append({**key, **{f"q{round(t * 100):02d}": 100 + 2 * v for t, v in zip(DECILES, z)}})
                    rows["bands"].append({**key, "lower_80": 93.6, "upper_80": 106.4})
            for model, r in rows.items():
                book.snapshot(pd.DataFrame(r), model=model, origin=str(months[origin]), name="run.csv")
    return path


def test_views_for_models_with_and_without_quantiles(ledger_path):
    with Ledger.open(ledger_path, create=False, read_only=True) as book:
        data = load_quantile_data(book, as_of=None, since=None, until=None)
    honest, narrow, bands = (build_quantile_view(data, m) for m in ("honest", NARROW, "bands"))
    assert honest.has_quantiles and narrow.has_quantiles and not bands.has_quantiles
    assert "sent no quantile forecasts" in bands.note and bands.wis_chart is not None
    assert [r.name for r in honest.rows] == [f"q{round(t * 100):02d}" for t in DECILES]
    assert all(r.n == 240 for r in honest.rows)
    # over-confident quantiles (spread 2 against 5): the outer levels fall outside their bands
    outer = {r.name: r for r in narrow.rows}
    assert outer["q10"].outside and outer["q90"].outside and outer["q10"].share > 0.2
    assert "not uniform" in narrow.pit_text
    assert sum(r.outside for r in honest.rows) <= 2


def test_model_pages_show_the_section_escaped(ledger_path, tmp_path):
    result = render_report(ledger_path, tmp_path / "site", workers=0)
    pages = {p.name: p.read_text(encoding="utf-8") for p in (tmp_path / "site").glob("m-*.html")}
    assert len(pages) == result.model_pages == 3
    text = "\n".join(pages.values())
    assert text.count('id="quantiles-h"') == 3
    assert text.count('id="c-quantile-reliability-fig"') == 2 and text.count('id="c-quantile-wis-fig"') == 3
    assert "narrow&lt;&amp;&gt;" in text and NARROW not in text
    assert "sent no quantile forecasts" in text
    methods = (tmp_path / "site" / "methods.html").read_text(encoding="utf-8")
    assert "Weighted interval score (WIS)" in methods and "Bracher" in methods
