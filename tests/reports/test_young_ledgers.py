"""Young and odd ledgers never crash the report, and each says plainly what is missing (issue 14, item 6)."""

from __future__ import annotations

import html
import re

import pytest

from reports import render_report

AS_OF = "2100-01-01"


def _text(page: str) -> str:
    return html.unescape(re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", page)))


def test_every_page_renders_and_says_what_is_missing(young_site):
    name, says, result = young_site.name, young_site.says, young_site.result
    pages = {p.name: p.read_text(encoding="utf-8") for p in result.out_dir.glob("*.html")}
    assert {"index.html", "findings.html", "series.html", "methods.html"} <= set(pages)
    index = _text(pages["index.html"])
    for phrase in says:
        assert phrase.lower() in index.lower(), f"{name}: the overview does not say {phrase!r}"
    for page, text in pages.items():
        assert "Traceback" not in text and "nan" not in re.findall(r"\bnan\b", _text(text)), (name, page)


def test_a_horizon_the_ledger_lacks_is_one_plain_error(tmp_path):
    """The default headline horizon adapts (no_horizon_one renders at h 3); asking for a horizon
    no run has is refused before anything is written, naming the horizons the ledger has."""
    from ledger.errors import UnknownName
    from tests.reports.young_ledgers import no_horizon_one

    no_horizon_one(tmp_path / "young.duckdb")
    with pytest.raises(UnknownName, match=r"--horizon 1: no run has this horizon; horizons in the ledger: 3"):
        render_report(tmp_path / "young.duckdb", tmp_path / "site", as_of=AS_OF, horizon=1, workers=0)
    assert not (tmp_path / "site" / "index.html").exists()
