"""The review report (issue 14): first screen, matrix, trends, forecast value added, CSV tables.

Uses the invented ledger of ``tests/reports/invented.py`` (planted: a drifting, biased incumbent with intervals
that are too narrow). Independent checks recompute figures from ``Ledger.cells`` with pandas.
"""

from __future__ import annotations

import csv
import html
import io
import math
import re

import numpy as np
import pandas as pd
import pytest

from ledger import Ledger
from reports import render_report
from reports.matrix import horizon_columns, pooled_mase
from reports.tables import attach_csv, defuse
from reports.trends import rolling
from ledger.wording import num
from tests.reports.invented import AS_OF, INCUMBENT
from tests.reports.stored_reviews import FINDINGS, MASE

OVERRIDE = {"challenger-ets": "incumbent-hw"}   # declared for the test: ets "adjusts" the incumbent


@pytest.fixture(scope="module")
def ledger_file(reviewed_ledger):
    return reviewed_ledger


@pytest.fixture(scope="module")
def site(ledger_file, tmp_path_factory):
    out = tmp_path_factory.mktemp("review-site") / "out"
    return render_report(ledger_file, out, as_of=AS_OF, incumbent=INCUMBENT, benchmark="snaive",
                         overrides=OVERRIDE, workers=0)


@pytest.fixture(scope="module")
def pages(site) -> dict[str, str]:
    return {p.name: p.read_text(encoding="utf-8") for p in site.out_dir.glob("*.html")}


def _text(fragment: str) -> str:
    return html.unescape(re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", fragment))).strip()


# ---------------------------------------------------------------- the first screen


def test_first_screen_holds_the_advice_and_the_top_findings(site, pages):
    index = pages["index.html"]
    first = _text(index[index.index('<section id="review"'):index.index('<section id="matrix"')])
    assert site.advice in first and site.advice.startswith("Keep incumbent-hw: challenger-ets has the lowest MASE")
    assert "not statistically significant" in site.advice    # the sentence joining advice and ranking
    top = index.index('id="top-findings"')
    items = re.findall(r"<li>.*?</li>", index[top:index.index("</ol>", top)], re.S)
    assert len(items) == 5 and all("Action:" in _text(i) for i in items)
    kinds = [re.search(r"<strong>(\w+)</strong>", i).group(1) for i in items]
    assert len(set(kinds)) >= 2                                # ranked across kinds
    review = index[index.index('<section id="review"'):index.index('<section id="matrix"')]
    figures = re.findall(r'<dd class="fig-note">(.*?)</dd>', review)
    assert 3 <= len(figures) <= 5
    assert sum("n = " in f for f in figures) >= 3              # headline figures state their sample size
    assert "As of 2100-01-01 23:59:59 UTC · 6 series · 3 models" in first


def test_no_leaderboard_and_one_matrix(pages):
    index = pages["index.html"]
    assert "Leaderboard" not in index and "leaderboard" not in index
    assert index.count('<table class="matrix">') == 1
    # matrix, the two tables of changes since the last review, value added, findings, advice; none per horizon
    assert index.count("<table") == 6


def _advice_case(rows: list[dict], models=("a", "b", "c"), incumbent="a") -> tuple[str, str]:
    from types import SimpleNamespace

    from reports.review import advice_sentence

    by_h = pd.DataFrame({"model": list(models), "horizon": 1, "mase": [0.9, 0.8, 1.2][:len(models)],
                         "n": 100, "n_unscaled": 0})
    advice = pd.DataFrame(rows) if rows else None
    data = SimpleNamespace(findings=SimpleNamespace(advice=advice), models=list(models), by_model_h=by_h,
                           incumbent=incumbent, horizon=1)
    return advice_sentence(data)


def _row(ch, recommend, reason, advice, periods=12, mase=1.0):
    return dict(challenger=ch, recommend=recommend, reason=reason, advice=advice, periods=periods,
                mase_challenger=mase)


def test_advice_sentence_in_every_case():
    v, s = _advice_case([_row("b", True, "recommended", "replace a with b: better over the last 12 evaluation periods"),
                         _row("c", False, "not better", "keep a: c is not better")])
    assert v == "replace" and s == "Replace a with b: better over the last 12 evaluation periods."
    v, s = _advice_case([_row("b", False, "not enough data", "keep a: only 5 common evaluation periods with b; "
                                                            "the recent window needs 12", periods=5),
                         _row("c", False, "not enough data", "keep a: c has no common cells with it", periods=0)])
    assert v == "not enough evidence" and s.startswith("Not enough evidence to replace a yet (only 5 common")
    v, s = _advice_case([_row("b", False, "mixed by horizon", "keep a: mixed"), _row("c", False, "not better", "keep a")])
    assert v == "keep" and "b has the lowest MASE" in s and "significantly better at some horizons and worse at others" in s
    v, s = _advice_case([], models=("a",))
    assert v == "not enough evidence" and "only model" in s
    v, s = _advice_case([], incumbent=None)
    assert v == "no advice" and "--incumbent MODEL" in s


# ---------------------------------------------------------------- the matrix


def test_horizon_buckets_follow_the_findings_buckets():
    assert [c for c, _ in horizon_columns(range(1, 7))] == ["1", "2", "3", "4", "5", "6"]
    assert horizon_columns(range(1, 13)) == [("1", [1]), ("2–3", [2, 3]), ("4–6", [4, 5, 6]), ("7–12", list(range(7, 13)))]
    assert [c for c, _ in horizon_columns([1, 2, 12, 18, 24, 30, 36])] == ["1", "2–3", "7–12", "13+"]


def test_matrix_bucket_mase_is_the_mean_over_the_buckets_cells(ledger_file):
    """Pooled MASE of horizons 2-3 = mean |e|/q over their scaled cells (Hyndman & Koehler 2006)."""
    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        by_h = book.scores(by=["model", "horizon"], as_of=AS_OF)
        cells = book.cells(as_of=AS_OF, horizons=[2, 3], models=[INCUMBENT])
    part = by_h[(by_h["model"] == INCUMBENT) & by_h["horizon"].isin([2, 3])]
    ok = cells[cells["q"].notna()]
    assert pooled_mase(part) == pytest.approx(float((ok["e"].abs() / ok["q"]).mean()), rel=1e-12)


def test_matrix_marks_watch_and_out_of_tolerance_apart(pages):
    index = pages["index.html"]
    assert re.search(r'class="mark zone-out"[^>]*>80% narrow!', index)     # planted: incumbent too narrow
    css = re.search(r"<style>(.*?)</style>", index, re.S).group(1)
    out = re.search(r"\.zone-out \{ color: ([^;]+);", css).group(1)
    watch = re.search(r"\.zone-watch \{ color: ([^;]+);", css).group(1)
    assert out != watch


# ---------------------------------------------------------------- trends and value added


def test_rolling_mean_is_weighted_by_cells():
    values = pd.DataFrame({"m": [1.0, 2.0, np.nan, 4.0]})
    weights = pd.DataFrame({"m": [1.0, 1.0, 1.0, 2.0]})
    got = rolling(values, weights, window=2)["m"].tolist()
    assert got == [1.0, 1.5, 2.0, 4.0]          # hand-computed: (1+2)/2, 2/1 (NaN has no weight), 4·2/2


def test_value_added_equals_an_independent_computation(site, ledger_file, pages):
    """FVA = 100·(1 − MASE_model / MASE_reference) on common scaled cells (Gilliland 2010, from memory)."""
    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        cells = book.cells(as_of=AS_OF)
    cells = cells[cells["q"].notna()].assign(loss=lambda c: c["e"].abs() / c["q"])
    keys = ["series", "period_index", "horizon"]

    def fva(model, ref):
        both = cells[cells["model"] == model].merge(cells[cells["model"] == ref], on=keys, suffixes=("_m", "_r"))
        return len(both), 100 * (1 - both["loss_m"].mean() / both["loss_r"].mean())

    index = pages["index.html"]
    section = index[index.index('<section id="value-added"'):index.index('<section id="in-words"')]
    link = re.search(r'<p class="csv"><a href="(tables/[^"]+)"', section).group(1)
    table = list(csv.DictReader(io.StringIO((site.out_dir / link).read_text(encoding="utf-8"))))
    rows = {(r["Model"], r["Reference"]): r for r in table}
    assert len(rows) == 3
    for model, ref in (("challenger-ets", "snaive"), ("incumbent-hw", "snaive"), ("challenger-ets", "incumbent-hw")):
        n, want = fva(model, ref)
        assert int(rows[(model, ref)]["n"]) == n
        assert float(rows[(model, ref)]["Value added"]) == pytest.approx(want, rel=1e-9)
    assert "override of its base" in section and 'id="c-fva-fig"' in section


def test_value_added_legend_names_each_step_whole_and_tells_a_models_two_steps_apart(pages):
    """Labels such as "challenger-ets vs incumbent-hw" (30 characters) were cut at 26 in a
    three-column legend; the override step of a model is drawn with hollow markers, its
    benchmark step with filled ones, in the model's one colour."""
    index = pages["index.html"]
    start = index.index('id="c-fva-fig"')
    svg = index[start:index.index("</svg>", start)]
    legend = set(re.findall(r"<text[^>]*>([^<]*)</text>", svg))
    for step in ("challenger-ets vs snaive", "incumbent-hw vs snaive", "challenger-ets vs incumbent-hw"):
        assert step in legend
    marks = re.findall(r'<use [^>]*style="fill: (#[0-9a-f]{6}); stroke: (#[0-9a-f]{6})', svg)
    fills: dict[str, set[str]] = {}
    for fill, stroke in marks:
        fills.setdefault(stroke, set()).add(fill)
    two = [stroke for stroke, f in fills.items() if len(f) == 2]
    assert len(two) == 1 and fills[two[0]] == {two[0], "#ffffff"}      # challenger-ets: filled and hollow


def test_bad_override_is_a_one_line_error(runner, ledger_file, tmp_path):
    from ledger.cli import report as cli_report  # noqa: F401
    from ledger.cli.common import app

    bad = runner.invoke(app, ["--ledger", str(ledger_file), "report", str(tmp_path / "x"), "--as-of", AS_OF,
                              "--adjusts", "challenger-ets"])
    assert bad.exit_code == 1 and bad.stderr.startswith("Error: --adjusts 'challenger-ets': write OVERRIDE=BASE")
    assert len(bad.stderr.strip().splitlines()) == 1
    bad = runner.invoke(app, ["--ledger", str(ledger_file), "report", str(tmp_path / "y"), "--as-of", AS_OF,
                              "--adjusts", "nope=incumbent-hw"])
    assert bad.exit_code == 1 and "'nope' has no scored run" in bad.stderr
    assert not (tmp_path / "y" / "index.html").exists()


def test_first_screen_lists_the_changes_since_the_last_review(pages):
    """Issue 19 item 2: new, resolved and persisting findings with their severity and figure then
    and now, and the models whose recent MASE moved by more than 0.1 (tests/reports/stored_reviews.py),
    above the matrix; the full tables follow it."""
    index = pages["index.html"]
    first = index[index.index('<section id="review"'):index.index('<section id="matrix"')]
    assert _text(first).count("5 new, 1 resolved, 2 persisting findings; 2 model(s) whose recent MASE moved by more than 0.1") == 1
    items = [re.sub(r"\s+([;)])", r"\1", re.sub(r"\(\s+", "(", _text(i)))   # no space where a tag was
             for i in re.findall(r"<li>.*?</li>", first[first.index('id="changes-list"'):], re.S)]

    def line(key, status):
        (a, b), (kind, model, series, level, _) = FINDINGS[key], key.split("|")
        where = " · ".join(w for w in (kind, model, series, f"{level}%" if level else "") if w)
        return (f"{status} {where}: {a[0] if a else '–'} → {b[0] if b else '–'}, "
                f"figure {num(a[1]) if a else '–'} → {num(b[1]) if b else '–'}")
    new = [k for k, (a, b) in FINDINGS.items() if a is None]
    want_findings = {line("drift|incumbent-hw|North/Hoses||", "resolved"),
                     line("calibration|incumbent-hw||80|all", "persisting")}
    assert len(items) == 6 and want_findings <= set(items[:4])        # one of each status, in turn
    assert sum(i in {line(k, "new") for k in new} for i in items[:4]) == 2
    moved = [f"MASE {m}: {num(a)} → {num(b)} ({num(b - a)}; 300 → 330 cells)" for m, (a, b) in MASE.items() if abs(b - a) > 0.1]
    assert items[4:] == moved and len(moved) == 2
    rest = index[index.index('<section id="matrix"'):]
    assert rest.index('<section id="changes"') < rest.index('<section id="over-time"')


# ---------------------------------------------------------------- tables to take away


_NUM = re.compile(r"^(-?[\d,]*\.?\d+)%?(?=\s|$)")


def _html_rows(table: str) -> list[list[str]]:
    rows = []
    for tr in re.findall(r"<tr\b.*?</tr>", table, re.S):
        if "colspan" in tr:
            continue
        cells = re.findall(r"<t[dh]\b[^>]*>(.*?)</t[dh]>", tr, re.S)
        rows.append([_text(c) for c in cells])
    return rows


def test_every_table_has_a_csv_with_its_numbers(site, pages):
    """Every <table> of every page is followed by a link to its CSV; the CSV has the table's rows
    and columns, and each number shown equals the CSV's value rounded as shown."""
    checked = 0
    for name, text in pages.items():
        tables = re.findall(r"<table\b.*?</table>", text, re.S)
        links = re.findall(r'<p class="csv"><a href="(tables/[^"]+\.csv)" download>', text)
        assert len(links) == len(tables), name
        for table, link in zip(tables, links):
            body = (site.out_dir / link).read_text(encoding="utf-8")
            want = _html_rows(table)
            got = list(csv.reader(io.StringIO(body)))
            # the shown columns, then the CSV-only columns (<data data-col>: cells and n_L beside coverage)
            assert len(got) == len(want) and all(len(a) >= len(b) for a, b in zip(got, want)), (name, link)
            assert all(re.fullmatch(r"(h \S+ )?(n|n_\d+(\.\d+)?|coverage_\d+(\.\d+)?)", c)
                       for c in got[0][len(want[0]):]), (name, link, got[0])
            for shown_row, csv_row in zip(want[1:], got[1:]):
                for shown, value in zip(shown_row, csv_row):
                    m = _NUM.match(shown)
                    if not m:
                        continue
                    number = m.group(1).replace(",", "")
                    decimals = len(number.split(".")[1]) if "." in number else 0
                    full = _NUM.match(value).group(1)       # a count with a "small sample" tag keeps its text
                    assert abs(float(full) - float(number)) <= 0.5 * 10 ** -decimals + 1e-9, (name, link, shown, value)
                    checked += 1
    assert checked > 500


def test_csv_values_carry_more_precision_than_the_page(site):
    matrix = (site.out_dir / "tables" / "index-1.csv").read_text(encoding="utf-8").splitlines()
    assert matrix[0].startswith("Model,h 1,")
    value = matrix[1].split(",")[1]
    assert len(value.replace(".", "").lstrip("0")) >= 10


def test_spreadsheet_formulas_are_defused():
    assert defuse("=HYPERLINK(\"x\")") == "'=HYPERLINK(\"x\")"
    assert defuse("+1+2") == "'+1+2" and defuse("@SUM(A1)") == "'@SUM(A1)" and defuse("\tx") == "'\tx"
    assert defuse("-3.5") == "-3.5" and defuse("plain") == "plain"
    page = ('<div class="table-wrap"><table><thead><tr><th>Series</th><th>n</th></tr></thead><tbody>'
            '<tr><td>=cmd|\' /C calc\'!A0</td><td><data value="1234.5">1,234</data></td></tr>'
            '<tr><td colspan="2">No findings.</td></tr></tbody></table></div>')
    out, files = attach_csv("p.html", page)
    assert list(files) == ["p-1.csv"]
    assert list(csv.reader(io.StringIO(files["p-1.csv"]))) == [["Series", "n"], ["'=cmd|' /C calc'!A0", "1234.5"]]
    assert out.index('<p class="csv">') > out.index("</div>")      # the link sits under the table
    assert '<td data-label="Series">' in out and '<td colspan="2">' in out
