"""The static HTML report: gold-file tests of the view-models' numbers, and HTML smoke tests.

Gold file: ``tests/gold/report_views.json`` holds the view-models of a small seeded ledger
(numbers rounded to 9 significant digits; times, versions, hashes and chart SVG scrubbed).
When a change to the numbers is intended, regenerate it and review the diff:

    BACKSIGHT_UPDATE_GOLD=1 /tmp/dev/bin/python -m pytest -q tests/test_report.py -k gold

On a mismatch the test writes ``tests/gold/report_views.actual.json``; diff it against the gold
file to see what changed. The ledger here (tests/reports/invented.py, built once per session by
tests/reports/conftest.py) is invented data (no real company or series), with planted problems: a biased, drifting incumbent on one series, intervals that are too narrow,
a gap in the actuals, a zero actual, and hostile series names.
"""

from __future__ import annotations

import dataclasses
import html
import html.parser
import json
import math
import os
import re
from pathlib import Path

import numpy as np
import pytest

from ledger import Ledger
from ledger.store import parse_as_of
from reports import render_report
from reports.data import load
from reports.names import MARKER, UnsafePath, page_name, safe_write   # MARKER: the folder marker, not a page
from reports.series_views import build_series
from reports.site import build_context, series_inputs
from reports.views import build_model, build_overview, build_series_index
from tests.helpers import TESTS
from tests.reports.invented import AS_OF, HOSTILE, INCUMBENT, MODELS, PLAIN, build_ledger

GOLD = TESTS / "gold" / "report_views.json"
ACTUAL = GOLD.with_name("report_views.actual.json")



@pytest.fixture(scope="module")
def ledger_file(invented_ledger) -> Path:
    return invented_ledger


@pytest.fixture(scope="module")
def site(invented_site):
    return invented_site


@pytest.fixture(scope="module")
def pages(site) -> dict[str, str]:
    result, _ = site
    return {p.name: p.read_text(encoding="utf-8") for p in result.out_dir.glob("*.html")}


def _series_page(pages: dict[str, str], key: str) -> str:
    return pages[page_name("s", key)]


# ---------------------------------------------------------------- gold file of the view-models


_SCRUB = {"generated_at": "<time>", "version": "<version>", "state_hash": "<hash>", "svg": "<svg>"}


def _plain(value):
    """JSON-ready: dataclasses and tuples to dicts and lists, floats to 9 significant digits, NaN to None."""
    if dataclasses.is_dataclass(value):
        return {f.name: _SCRUB[f.name] if f.name in _SCRUB else _plain(getattr(value, f.name))
                for f in dataclasses.fields(value)}
    if isinstance(value, dict):
        return {str(k): _plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v) for v in value]
    if isinstance(value, (float, np.floating)):
        return None if not math.isfinite(value) else float(f"{float(value):.9g}")
    if isinstance(value, (np.integer,)):
        return int(value)
    return value


def _views(path: Path) -> dict:
    with Ledger.open(path, create=False, read_only=True) as book:
        data = load(book, as_of=parse_as_of(AS_OF), since=None, until=None, horizon=1, incumbent=INCUMBENT, benchmark="snaive")
    ctx = build_context(data, "Invented review")
    return {
        "context": _plain(ctx),
        "overview": _plain(build_overview(data, ctx)),
        "models": {m: _plain(build_model(data, ctx, m)) for m in data.models},
        "series_index": _plain(build_series_index(data, ctx)),
        "series": {i.key: _plain(build_series(i)) for i in series_inputs(data, ctx, with_chart=False)},
    }


@pytest.fixture(scope="module")
def views(ledger_file) -> dict:
    return _views(ledger_file)


def test_view_models_match_gold(views):
    actual = json.dumps(views, indent=1, sort_keys=True, ensure_ascii=False) + "\n"
    if os.environ.get("BACKSIGHT_UPDATE_GOLD") == "1":
        GOLD.write_text(actual, encoding="utf-8")
    expected = GOLD.read_text(encoding="utf-8") if GOLD.exists() else ""
    if actual != expected:
        ACTUAL.write_text(actual, encoding="utf-8")
        pytest.fail(f"report view-models differ from {GOLD}; the actual output is in {ACTUAL}. "
                    f"Diff the two; if the change is intended, rerun with BACKSIGHT_UPDATE_GOLD=1 "
                    "(see this module's docstring) and commit the new gold file.")
    ACTUAL.unlink(missing_ok=True)


def test_gold_numbers_agree_with_the_ledger_api(views, ledger_file):
    """The matrix's and the model page's figures are Ledger.scores' figures, and coverage is
    misses over cells."""
    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        scores = book.scores(by=["model", "horizon"], as_of=AS_OF)
        pooled = book.scores(by=["model"], as_of=AS_OF, horizons=[1])
        cells = book.interval_cells(as_of=AS_OF, horizons=[1], models=[INCUMBENT])
    matrix = views["overview"]["matrix"]
    assert matrix["columns"] == ["1", "2", "3", "4", "5", "6"]          # six horizons: one column each
    cell = next(r for r in matrix["rows"] if r["model"] == INCUMBENT)["cells"][0]
    want = scores[(scores["model"] == INCUMBENT) & (scores["horizon"] == 1)].iloc[0]
    assert cell["n"] == want["n"] and cell["mase"] == pytest.approx(pooled.loc[pooled["model"] == INCUMBENT, "mase"].iloc[0], rel=1e-8)
    assert [m["text"] for m in cell["marks"]] == ["80% narrow!", "95% narrow!"]   # planted: too narrow
    row = next(r for r in views["models"][INCUMBENT]["by_horizon"] if r["horizon"] == 1)
    assert row["n"] == want["n"] and row["mase"] == pytest.approx(want["mase"], rel=1e-8)
    at80 = cells[cells["level"] == 80]
    cov = next(c for c in row["coverage"] if c["level"] == 80)
    assert cov["n"] == len(at80)
    assert cov["misses"] == int((at80["below"] | at80["above"]).sum())
    assert cov["observed"] == pytest.approx(100 * want["coverage_80"], rel=1e-8)
    assert cov["direction"] == "too narrow"      # planted: the incumbent's intervals are too narrow


def test_footer_carries_the_ledger_state_hash(site, ledger_file, pages):
    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        digest = book.report_state_hash(as_of=AS_OF)
    assert site[0].state_hash == digest
    for name, text in pages.items():
        assert digest in text, name
        for label in ("As of", "Ledger state", "Backsight", "Generated", "2100-01-01 23:59:59 UTC"):
            assert label in text, (name, label)


# ---------------------------------------------------------------- HTML smoke tests


SECTIONS = {
    "index.html": ["review", "advice-sentence", "top-findings", "figures", "matrix", "over-time", "value-added",
                   "headlines", "charts", "findings", "advice"],
    "model": ["summary", "metrics", "findings", "comparisons"],
    "series": ["summary", "chart", "metrics", "latest", "findings", "data-quality"],
    "methods.html": ["sign", "metrics", "tests", "cautions", "sources"],
    "findings.html": ["findings"],
    "series.html": ["series"],
}


class _Links(html.parser.HTMLParser):
    """Collects ids, link targets and every attribute value of one page."""

    def __init__(self):
        super().__init__()
        self.ids, self.hrefs, self.values, self.tags = [], [], [], []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        for name, value in attrs:
            if name == "id":
                self.ids.append(value)
            if name in ("href", "xlink:href") and tag == "a":
                self.hrefs.append(value)
            self.values.append((tag, name, value or ""))


def _parse(text: str) -> _Links:
    p = _Links()
    p.feed(text)
    return p


def test_every_page_is_written_with_its_sections(site, pages):
    result, _ = site
    models = [n for n in pages if n.startswith("m-")]
    series = [n for n in pages if n.startswith("s-")]
    assert len(models) == len(MODELS) == result.model_pages
    assert len(series) == len(HOSTILE + PLAIN) == result.series_pages
    assert result.pages == len(pages) == 4 + len(models) + len(series)
    for name, text in pages.items():
        kind = "model" if name.startswith("m-") else "series" if name.startswith("s-") else name
        ids = set(_parse(text).ids)
        missing = [s for s in SECTIONS[kind] if s not in ids]
        assert not missing, (name, missing)


def check_links(out: Path, pages: dict[str, str]) -> None:
    """Ids are unique on each page, and every link names a written page and an id on it."""
    for name, text in pages.items():
        parsed = _parse(text)
        assert len(parsed.ids) == len(set(parsed.ids)), f"{name}: duplicate ids"
        for href in parsed.hrefs:
            target, _, fragment = href.partition("#")
            target = target or name
            assert (out / target).is_file(), (name, href)
            if fragment:
                assert fragment in _parse(pages[target]).ids, (name, href)


def test_every_internal_link_resolves(site, pages):
    check_links(site[0].out_dir, pages)


def test_no_page_refers_to_anything_outside_itself(pages):
    for name, text in pages.items():
        lowered = text.lower()
        for bad in ("http:", "https:", "@import", "<script", "<link", "<iframe", "<img", "<object", "<embed"):
            assert bad not in lowered, (name, bad)
        for target in re.findall(r"url\(\s*['\"]?([^)'\"]*)", lowered):
            assert target.startswith("#") or target.startswith("data:"), (name, target)
        for tag, attr, value in _parse(text).values:
            if attr in ("href", "src", "xlink:href", "action", "srcset"):
                assert not value.startswith("//") and ":" not in value.split("#")[0], (name, tag, attr, value)


def test_every_page_forbids_network_loads_and_prints(pages):
    for name, text in pages.items():
        csp = re.search(r'<meta http-equiv="Content-Security-Policy" content="([^"]+)"', text)
        assert csp, name
        policy = html.unescape(csp.group(1))
        assert "default-src 'none'" in policy and "script-src 'none'" in policy, name
        assert '<meta name="viewport" content="width=device-width, initial-scale=1">' in text
        assert "@media print" in text and "<style>" in text, name


def test_hostile_names_are_escaped_and_get_distinct_safe_files(site, pages, tmp_path):
    out = site[0].out_dir
    assert [p for p in out.parent.iterdir()] == [out], "something was written beside the output folder"
    names = [page_name("s", k) for k in HOSTILE + PLAIN]
    assert len({n.casefold() for n in names}) == len(names)            # distinct on case-insensitive disks
    for n in names:
        assert "/" not in n and "\\" not in n and not n.startswith(".") and (out / n).resolve().parent == out
    for name, text in pages.items():
        assert "<script>alert(1)</script>" not in text, name
        assert "<i>Q4</i>" not in text and "<b>shears</b>" not in text, name
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in pages["series.html"]
    assert "Series: &lt;script&gt;alert(1)&lt;/script&gt;" in _series_page(pages, "<script>alert(1)</script>")
    assert "Series: North/Hoses" in _series_page(pages, "North/Hoses")
    assert "Series: north/hoses" in _series_page(pages, "north/hoses")
    assert "Series: ../../etc" in _series_page(pages, "../../etc")


def test_safe_write_refuses_paths_that_leave_the_folder(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    for bad in ("../escape.html", "sub/page.html", ".hidden.html"):
        with pytest.raises(UnsafePath, match="outside|choose another"):
            safe_write(out, bad, "x")
    (out / "link.html").symlink_to(tmp_path / "elsewhere.html")
    with pytest.raises(UnsafePath):
        safe_write(out, "link.html", "x")
    assert not (tmp_path / "elsewhere.html").exists() and not (tmp_path / "escape.html").exists()


def test_planted_problems_are_visible(pages):
    index = pages["index.html"]
    assert "incumbent-hw&#39;s (the incumbent)" in index and "too narrow" in index
    assert "Replacement advice" in index
    hoses = page_name("s", "North/Hoses")
    drift = re.search(r"<td[^>]*>drift</td>.*?</tr>", index, flags=re.DOTALL)
    assert drift and hoses in drift.group(0), "the planted drift on North/Hoses links to its series page"
    pots = _series_page(pages, "east/pots")
    assert "Missing actuals: 2024-07 to 2024-08 (2 periods)" in pots
    rakes = _series_page(pages, "south/rakes & <b>shears</b>")
    assert "1 actual equal to zero" in rakes


def test_gaps_are_breaks_in_the_chart(pages):
    """The actuals line of east/pots is drawn in two pieces: a moveto after the gap, never bridged."""
    svg = _series_page(pages, "east/pots")
    path = re.search(r'<path d="([^"]+)"[^>]*style="fill: none; stroke: #1f2a36; stroke-width: 1\.9', svg, flags=re.IGNORECASE)
    assert path, "the actuals line is in the chart"
    assert path.group(1).count("M") == 2


def test_charts_are_accessible_figures(pages):
    text = pages["index.html"]
    figures = re.findall(r'<figure class="chart" id="([^"]+)-fig">\s*<svg ([^>]+)>', text)
    assert [f[0] for f in figures] == ["c-mase", "c-won", "c-fva", "c-horizon", "c-calibration"]
    for chart_id, attrs in figures:
        assert 'role="img"' in attrs and f'aria-describedby="{chart_id}-d"' in attrs
        assert f'<figcaption id="{chart_id}-d">' in text and f'<title id="{chart_id}-t">' in text


def test_progress_is_reported_to_the_end(site):
    result, calls = site
    done = [c[0] for c in calls]
    assert done == sorted(done) and calls[-1][0] == calls[-1][1] == result.pages


@pytest.fixture(scope="module")
def tiny(tmp_path_factory) -> Path:
    return build_ledger(tmp_path_factory.mktemp("tiny") / "tiny.duckdb", keys=("a/one", "b/two"))


def test_cli_report_prints_the_index_path_and_renders_reproducibly(runner, tiny, tmp_path):
    """The command prints index.html's path; the API with the same as-of writes the same pages."""
    from ledger.cli import report as cli_report  # noqa: F401  (registers the command on the shared app)
    from ledger.cli.common import app

    out = tmp_path / "cli"
    res = runner.invoke(app, ["--ledger", str(tiny), "report", str(out), "--as-of", AS_OF,
                              "--incumbent", INCUMBENT, "--benchmark", "snaive", "--title", "Tiny"])
    assert res.exit_code == 0, res.output
    assert res.stdout == f"{(out / 'index.html').resolve()}\n"
    again = render_report(tiny, tmp_path / "api", as_of=AS_OF, incumbent=INCUMBENT, benchmark="snaive", title="Tiny")
    names = sorted(p.name for p in out.glob("*.html"))
    assert names == sorted(p.name for p in again.out_dir.glob("*.html")) and len(names) == 4 + 3 + 2
    tables = sorted(p.relative_to(out).as_posix() for p in out.glob("tables/*.csv"))
    assert tables and tables == sorted(p.relative_to(again.out_dir).as_posix() for p in again.out_dir.glob("tables/*.csv"))
    names += tables
    stamp = re.compile(r"<dt>Generated</dt><dd>[^<]*</dd>")
    for name in names:       # charts included: the SVG is deterministic too
        a, b = ((d / name).read_text(encoding="utf-8") for d in (out, again.out_dir))
        assert stamp.sub("", a) == stamp.sub("", b), name


def test_worker_processes_write_the_same_pages(pages, ledger_file, tmp_path):
    """Large reports render series pages in worker processes and fill in their findings tables
    afterwards; the pages equal those written in one process (the module's site)."""
    from reports.site import FINDINGS_SLOT

    result = render_report(ledger_file, tmp_path / "pool", as_of=AS_OF, title="Invented review <i>Q4</i>",
                           incumbent=INCUMBENT, benchmark="snaive", workers=2)
    names = sorted(p.name for p in result.out_dir.glob("*.html"))
    assert names == sorted(pages)
    stamp = re.compile(r"<dt>Generated</dt><dd>[^<]*</dd>")
    for name in names:
        text = (result.out_dir / name).read_text(encoding="utf-8")
        assert FINDINGS_SLOT not in text
        assert stamp.sub("", text) == stamp.sub("", pages[name]), name
    assert '<td data-label="Kind">drift</td>' in _series_page(pages, "North/Hoses"), "a series page shows its findings"


def test_cli_report_refuses_an_unknown_incumbent(runner, tiny, tmp_path):
    from ledger.cli import report as cli_report  # noqa: F401
    from ledger.cli.common import app

    bad = runner.invoke(app, ["--ledger", str(tiny), "report", str(tmp_path / "x"), "--as-of", AS_OF,
                              "--incumbent", "nope"])
    assert bad.exit_code == 1
    assert bad.stderr.startswith("Error: --incumbent 'nope' has no scored run in the ledger")


def test_reused_series_canvas_draws_like_a_fresh_one(site, ledger_file, pages):
    """Series charts reuse one figure; a chart drawn after others equals one from a fresh figure."""
    from reports.series_chart import clear_canvases

    with Ledger.open(ledger_file, create=False, read_only=True) as book:
        data = load(book, as_of=parse_as_of(AS_OF), since=None, until=None, horizon=1,
                    incumbent=INCUMBENT, benchmark="snaive")
    ctx = build_context(data, "Invented review <i>Q4</i>")
    inputs = {i.key: i for i in series_inputs(data, ctx)}
    clear_canvases()
    fresh = build_series(inputs["east/pots"]).chart.svg          # first chart on a new canvas
    assert fresh in _series_page(pages, "east/pots")              # the site drew it after other series
    build_series(inputs["North/Hoses"])
    assert build_series(inputs["east/pots"]).chart.svg == fresh
