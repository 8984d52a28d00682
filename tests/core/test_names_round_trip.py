"""Names from all of Unicode through the HTML report and through export → import (issue 16, class 1).

A name the identity rule admits (README: keys are compared after trimming and NFC normalisation;
control, bidi and zero-width characters are refused) shows in the report as exactly its
normalised text — escaped, never markup, no script, no event attribute — and comes back from a
Parquet or CSV export unchanged, with every table hash equal. A name the rule refuses is refused
at intake with one clear line, and nothing is written.

The default run draws a few examples (a report is a few seconds); ``tests/benchmarks/soak_names.py``
runs the same tests with many more (BACKSIGHT_NAME_EXAMPLES).
"""

from __future__ import annotations

import csv
import io
import os
import tempfile
import unicodedata
from html.parser import HTMLParser
from pathlib import Path

import pandas as pd
from hypothesis import example, given, settings, strategies as st

from ledger import Ledger
from ledger.errors import LedgerError
from ledger.intake.keys import key_problem
from ledger.store import TABLES, Store
from reports import render_report
from reports.names import page_name
from reports.tables import TABLES_DIR, defuse

from tests.helpers import NAMES

# drawn examples beside the explicit ones; a report costs about 4 s of CPU, so the default run keeps few
EXAMPLES = int(os.environ.get("BACKSIGHT_NAME_EXAMPLES", "2"))
HOSTILE_SERIES = ["<script>alert(1)</script>", " cafe\u0301 ", "=1+1", "a\x1b[2Jb"]
HOSTILE_MODELS = ["[/]<b>m</b>&amp;", "javascript:x' onload='y", "\u202em"]
MONTHS = [f"2025-{m:02d}" for m in range(1, 13)] + ["2026-01", "2026-02"]
AS_OF = "2100-01-01"


def identity(name: str) -> str:
    """The README's identity rule, written out independently of the intake's Arrow code."""
    return unicodedata.normalize("NFC", name.strip())


def refused(name: str) -> bool:
    key = identity(name)
    return not key or key_problem(key) is not None


def _admitted(names: list[str]) -> list[str]:
    """One raw name per distinct admitted key, in drawing order."""
    seen: dict[str, str] = {}
    for name in names:
        if not refused(name):
            seen.setdefault(identity(name), name)
    return list(seen.values())


def _assert_refused_cleanly(path: Path, series: list[str], models: list[str]) -> None:
    """Every refused name gets one clear, inert line at intake, and the ledger stays empty."""
    with Ledger.open(path) as book:
        for name in series:
            try:
                book.record_actuals(pd.DataFrame({"series": [name], "period": ["2025-01"], "actual": [1.0]}))
            except LedgerError as exc:
                text = str(exc)
                assert "column series" in text and ("keys may not hold" in text or "empty" in text), text
            else:
                raise AssertionError(f"series {name!r} was admitted")
        for name in models:
            try:
                book.snapshot(pd.DataFrame({"series": ["x"], "period": ["2025-02"], "forecast": [1.0]}),
                              model=name, origin="2025-01")
            except LedgerError as exc:
                text = str(exc)
                assert "--model" in text and ("keys may not hold" in text or "empty" in text), text
            else:
                raise AssertionError(f"model {name!r} was admitted")
        assert book.runs().empty and book.store.con.execute("SELECT count(*) FROM actuals").fetchone()[0] == 0


def _build(path: Path, series: list[str], models: list[str]) -> None:
    """Invented data: 14 months of actuals per series, three runs per model with 80% bounds."""
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": [s for s in series for _ in MONTHS],
                                          "period": MONTHS * len(series),
                                          "actual": [10.0 + (i * 7) % 5 for i in range(len(series) * len(MONTHS))]}))
        for k, model in enumerate(models):
            for o in (10, 11, 12):
                book.snapshot(pd.DataFrame({"series": series, "period": MONTHS[o + 1], "forecast": 11.0 + k,
                                            "lower_80": 8.0, "upper_80": 14.0 + k}), model=model, origin=MONTHS[o])


_URL_ATTRS = {"href", "src", "xlink:href", "action", "formaction", "srcset"}


class _Page(HTMLParser):
    """Tags, attributes and the text of <title> and <h1> of one page."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: set[str] = set()
        self.attrs: set[str] = set()
        self.urls: list[str] = []
        self.text = {"title": "", "h1": ""}
        self._open: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.add(tag)
        self.attrs.update(a for a, _ in attrs)
        self.urls += [v or "" for a, v in attrs if a in _URL_ATTRS]
        self._open.append(tag)

    def handle_endtag(self, tag):
        if self._open and self._open[-1] == tag:
            self._open.pop()

    def handle_data(self, data):
        for tag in self.text:
            if tag in self._open:
                self.text[tag] += data


def _parse(path: Path) -> _Page:
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    page.close()
    return page


_BASELINE: dict[str, set[str]] = {}


def _baseline_markup() -> dict[str, set[str]]:
    """Every tag and attribute a report of plain names uses (built once per process)."""
    if not _BASELINE:
        with tempfile.TemporaryDirectory() as tmp:
            _build(Path(tmp) / "plain.duckdb", ["plain-a", "plain-b"], ["plain-m", "plain-n"])
            result = render_report(Path(tmp) / "plain.duckdb", Path(tmp) / "site", as_of=AS_OF, workers=0)
            pages = [_parse(p) for p in result.out_dir.glob("*.html")]
        _BASELINE["tags"] = set().union(*(p.tags for p in pages))
        _BASELINE["attrs"] = set().union(*(p.attrs for p in pages))
    return _BASELINE


@settings(max_examples=EXAMPLES, deadline=None)
@given(series=st.lists(NAMES, min_size=1, max_size=3), models=st.lists(NAMES, min_size=1, max_size=2))
@example(series=HOSTILE_SERIES, models=HOSTILE_MODELS)
def test_any_name_is_escaped_and_inert_in_the_report(series, models):
    base = _baseline_markup()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        _assert_refused_cleanly(tmp / "refused.duckdb", [s for s in series if refused(s)],
                                [m for m in models if refused(m)])
        keep_series, keep_models = _admitted(series), _admitted(models)
        if not keep_series or not keep_models:
            return
        _build(tmp / "l.duckdb", keep_series, keep_models)
        result = render_report(tmp / "l.duckdb", tmp / "site", as_of=AS_OF, workers=0)
        for path in result.out_dir.glob("*.html"):
            page = _parse(path)
            assert page.tags <= base["tags"], (path.name, page.tags - base["tags"])        # no markup injected
            assert page.attrs <= base["attrs"], (path.name, page.attrs - base["attrs"])
            assert "script" not in page.tags and not any(a.startswith("on") for a in page.attrs)
            assert not any(":" in u.split("#")[0] for u in page.urls), (path.name, page.urls)   # no scheme
        for prefix, names, heading in (("s", keep_series, "Series: "), ("m", keep_models, "Model: ")):
            for name in names:
                page = _parse(result.out_dir / page_name(prefix, identity(name)))
                assert page.text["h1"].strip() == heading + identity(name)
                assert page.text["title"].startswith(identity(name) + " · ")
        _assert_downloads_hold(result.out_dir, keep_series, keep_models)


def _assert_downloads_hold(out: Path, series: list[str], models: list[str]) -> None:
    """The report's CSV downloads (tables/) name each series and model exactly, defused against
    formulas as the README says of CSV files people open, and no cell is a live formula."""
    cells: set[str] = set()
    for path in (out / TABLES_DIR).glob("*.csv"):
        rows = list(csv.reader(io.StringIO(path.read_text(encoding="utf-8"), newline="")))
        cells.update(c for row in rows[1:] for c in row)
    assert cells, "the report wrote no CSV downloads"
    for cell in cells:
        assert defuse(cell) == cell, cell          # nothing a spreadsheet would evaluate
    for name in series + models:
        assert defuse(identity(name)) in cells, (name, sorted(cells)[:20])


@settings(max_examples=2 * EXAMPLES, deadline=None)
@given(series=st.lists(NAMES, min_size=1, max_size=4), models=st.lists(NAMES, min_size=1, max_size=2))
@example(series=HOSTILE_SERIES + ["'quoted", "-north"], models=HOSTILE_MODELS + ["@sum"])
def test_any_name_comes_back_unchanged_from_export_and_import(series, models):
    keep_series, keep_models = _admitted(series), _admitted(models)
    if not keep_series or not keep_models:
        return
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        _build(tmp / "l.duckdb", keep_series, keep_models)
        with Store.open(tmp / "l.duckdb") as store:
            want = {t: store.table_hash(t) for t in TABLES}
            names = (sorted(r[0] for r in store.con.execute("SELECT series FROM series").fetchall()),
                     sorted(r[0] for r in store.con.execute("SELECT DISTINCT model FROM runs").fetchall()))
        assert names == (sorted(identity(s) for s in keep_series), sorted(identity(m) for m in keep_models))
        for fmt in ("parquet", "csv"):
            with Ledger.open(tmp / "l.duckdb", create=False, read_only=True) as book:
                book.export(tmp / fmt, fmt=fmt)
            with Ledger.open(tmp / f"{fmt}.duckdb") as book:
                book.import_export(tmp / fmt)
            with Store.open(tmp / f"{fmt}.duckdb") as store:
                assert {t: store.table_hash(t) for t in TABLES} == want, fmt
                back = (sorted(r[0] for r in store.con.execute("SELECT series FROM series").fetchall()),
                        sorted(r[0] for r in store.con.execute("SELECT DISTINCT model FROM runs").fetchall()))
            assert back == names, fmt
