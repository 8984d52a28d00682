"""The report in a real browser: headless Chromium renders pages at 1280 and 390 px wide.

Screenshots are kept as test artefacts in $BACKSIGHT_SCREENSHOTS (default: build/report-screenshots/
of the checkout, which git ignores and later runs overwrite; pytest's temporary folders are
pruned after three runs, so they would not keep them). Chromium is
required: CI (.ci/run) installs Debian's ``chromium``; without it this test fails, never skips.

Overflow is measured on a copy of each page embedded as ``srcdoc`` in an iframe of the width
under test, inside a measuring page whose small script writes the iframe document's
scrollWidth and clientWidth into the DOM that ``--dump-dom`` prints. The report pages
themselves keep their script-free CSP; only the measuring wrapper runs a script. A control
frame with a deliberately wide block proves the measurement can see an overflow.
"""

from __future__ import annotations

import html
import os
import re
import shutil
import subprocess
from pathlib import Path

import matplotlib.image
import numpy as np
import pytest

from reports import render_report
from reports.names import page_name
from tests.reports.invented import AS_OF, INCUMBENT

pytestmark = pytest.mark.browser

WIDTHS = (1280, 390)
SHOTS_DEFAULT = Path(__file__).resolve().parents[2] / "build" / "report-screenshots"
CHROMIUM_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync",
                  "--hide-scrollbars", "--mute-audio"]


def _chromium() -> str:
    found = shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)
    if not found:
        pytest.fail("headless Chromium is required for the report's browser test and was not found; "
                    "install the Debian package: apt-get install -y chromium (.ci/run does this in CI)")
    return found


def _run(args: list[str], profile: Path) -> subprocess.CompletedProcess:
    cmd = [_chromium(), *CHROMIUM_FLAGS, f"--user-data-dir={profile}", *args]
    done = subprocess.run(cmd, capture_output=True, text=True, timeout=180, check=False)
    assert done.returncode == 0, f"chromium failed ({done.returncode}): {done.stderr[-800:]}"
    return done


@pytest.fixture(scope="module")
def profile(tmp_path_factory) -> Path:
    """One Chromium profile folder for the module: each launch with a fresh one paid for setting it up."""
    return tmp_path_factory.mktemp("chromium-profile")


@pytest.fixture(scope="module")
def site(reviewed_ledger, tmp_path_factory) -> Path:
    # reviewed: the first screen then also lists the changes since the last review
    return render_report(reviewed_ledger, tmp_path_factory.mktemp("browser") / "site", as_of=AS_OF,
                         incumbent=INCUMBENT, benchmark="snaive", title="Invented review").out_dir


@pytest.fixture(scope="module")
def shots(tmp_path_factory) -> Path:
    folder = Path(os.environ.get("BACKSIGHT_SCREENSHOTS") or SHOTS_DEFAULT)
    folder.mkdir(parents=True, exist_ok=True)
    return folder


PAGES = {"index": "index.html", "model": page_name("m", INCUMBENT), "series": page_name("s", "North/Hoses")}


def _colours(png: Path) -> tuple[int, float]:
    """Distinct colours in a PNG and the share of its most common colour."""
    img = matplotlib.image.imread(png)
    px = np.round(img[..., :3] * 255).astype(np.uint8).reshape(-1, 3)
    _, counts = np.unique(px, axis=0, return_counts=True)
    return len(counts), float(counts.max() / counts.sum())


@pytest.mark.parametrize("width", WIDTHS)
@pytest.mark.parametrize("kind", list(PAGES))
def test_screenshot_is_not_blank(site, shots, tmp_path, profile, kind, width):
    png = shots / f"report-{kind}-{width}.png"
    png.unlink(missing_ok=True)
    _run([f"--screenshot={png}", f"--window-size={width},1800", (site / PAGES[kind]).as_uri()], profile)
    assert png.is_file() and png.stat().st_size > 10_000, png
    shape = matplotlib.image.imread(png).shape
    assert shape[1] == width, f"{png}: {shape[1]} px wide, expected {width}"
    distinct, top_share = _colours(png)
    assert distinct > 200, f"{png}: only {distinct} colours; the page looks blank"
    assert top_share < 0.9, f"{png}: {top_share:.0%} of the pixels are one colour"


def _measuring_page(page: str) -> str:
    control = page.replace("</main>", '<div style="width: 2000px; height: 4px"></div></main>')
    frames = [(f"w{w}", w, page) for w in WIDTHS] + [("control", 390, control)]
    body = "".join(f'<iframe id="{fid}" width="{w}" height="900" style="border:0;display:block" '
                   f'srcdoc="{html.escape(text, quote=True)}"></iframe>' for fid, w, text in frames)
    script = ("window.addEventListener('load', function () { document.querySelectorAll('iframe').forEach("
              "function (f) { var d = f.contentDocument.documentElement; document.body.setAttribute("
              "'data-' + f.id, d.scrollWidth + 'x' + d.clientWidth); }); });")
    return f"<!DOCTYPE html><html><body style='margin:0'>{body}<script>{script}</script></body></html>"


@pytest.mark.parametrize("kind", list(PAGES))
def test_page_does_not_overflow_horizontally(site, tmp_path, profile, kind):
    wrapper = tmp_path / "measure.html"
    wrapper.write_text(_measuring_page((site / PAGES[kind]).read_text(encoding="utf-8")), encoding="utf-8")
    dom = _run(["--window-size=1400,1000", "--dump-dom", wrapper.as_uri()], profile).stdout
    found = dict(re.findall(r'data-(w\d+|control)="(\d+x\d+)"', dom))
    assert set(found) == {"w1280", "w390", "control"}, f"measurement missing from the DOM: {found}"
    scroll, client = map(int, found["control"].split("x"))
    assert scroll > client + 1000, "the control frame must overflow, or the measurement cannot see overflow"
    for width in WIDTHS:
        scroll, client = map(int, found[f"w{width}"].split("x"))
        assert client >= width - 20 and scroll <= client, f"{kind} at {width} px: content {scroll} px wide in {client} px"


# ---------------------------------------------------------------- the review (issue 14)


def _probe_page(page: str, width: int, height: int) -> str:
    """A wrapper with the page in an iframe of width x height and a script that writes, into the
    DOM, where the review ends, where the matrix starts, the right edge of the widest table cell,
    the page's width and the narrowest caption as a share of its table's width (1 without captions)."""
    frame = (f'<iframe id="f" width="{width}" height="{height}" style="border:0;display:block" '
             f'srcdoc="{html.escape(page, quote=True)}"></iframe>')
    script = ("window.addEventListener('load', function () { var d = document.getElementById('f').contentDocument;"
              "var r = d.getElementById('review'), m = d.getElementById('matrix'), right = 0;"
              "d.querySelectorAll('td, th').forEach(function (c) { var b = c.getBoundingClientRect();"
              " if (b.width > 0) { right = Math.max(right, b.right); } });"
              "var share = 1; d.querySelectorAll('table > caption').forEach(function (c) {"
              " var t = c.parentElement.getBoundingClientRect().width;"
              " if (t > 0) { share = Math.min(share, c.getBoundingClientRect().width / t); } });"
              "document.body.setAttribute('data-probe', [r ? r.getBoundingClientRect().bottom : -1,"
              " m ? m.getBoundingClientRect().top : -1, right, d.documentElement.clientWidth, share].join('x')); });")
    return f"<!DOCTYPE html><html><body style='margin:0'>{frame}<script>{script}</script></body></html>"


def _probe(page_file: Path, width: int, height: int, tmp_path: Path,
           profile: Path) -> tuple[float, float, float, float, float]:
    wrapper = tmp_path / f"probe-{width}.html"
    wrapper.write_text(_probe_page(page_file.read_text(encoding="utf-8"), width, height), encoding="utf-8")
    dom = _run(["--window-size=1400,1000", "--dump-dom", wrapper.as_uri()], profile).stdout
    found = re.search(r'data-probe="([-\d.]+)x([-\d.]+)x([-\d.]+)x([-\d.]+)x([-\d.e]+)"', dom)
    assert found, "the probe wrote nothing into the DOM"
    return tuple(float(x) for x in found.groups())


def test_first_screen_at_1280x800_is_the_review(site, shots, tmp_path, profile):
    review_bottom, matrix_top, *_ = _probe(site / "index.html", 1280, 800, tmp_path, profile)
    assert 0 < review_bottom <= 800, f"the review ends at {review_bottom} px, below the fold of 800 px"
    assert matrix_top >= review_bottom
    for width in WIDTHS:
        png = shots / f"report-index-first-screen-{width}x800.png"
        png.unlink(missing_ok=True)
        _run([f"--screenshot={png}", f"--window-size={width},800", (site / "index.html").as_uri()], profile)
        assert png.is_file() and png.stat().st_size > 10_000


@pytest.mark.parametrize("kind", ["index", "model", "series", "findings"])
def test_no_table_column_is_off_screen_at_390(site, tmp_path, profile, kind):
    """On a phone every table is a stack of labelled cards: no cell reaches past the screen, and
    each caption spans its cards (it shrank to a word a line while the table was a block)."""
    name = {"findings": "findings.html"}.get(kind) or PAGES[kind]
    _, _, right, client, share = _probe(site / name, 390, 900, tmp_path, profile)
    assert 0 < right <= client + 0.5, f"{kind}: a table cell ends at {right} px on a {client} px screen"
    assert share > 0.9, f"{kind}: a table caption is {share:.0%} of its table's width"


def _pdf_pages(pdf: Path) -> int:
    counts = [int(n) for n in re.findall(rb"/Count (\d+)", pdf.read_bytes())]
    assert counts, f"{pdf}: no page tree"
    return max(counts)


@pytest.mark.parametrize("paper", ["A4", "letter"])
def test_the_review_prints_on_one_page(site, tmp_path, profile, paper):
    text = (site / "index.html").read_text(encoding="utf-8")
    first = text[:text.index('<section id="matrix"')] + "</main></body></html>"
    page = tmp_path / "first.html"
    page.write_text(first.replace("</head>", f"<style>@page {{ size: {paper}; }}</style></head>"), encoding="utf-8")
    pdf = tmp_path / "first.pdf"
    _run(["--no-pdf-header-footer", f"--print-to-pdf={pdf}", page.as_uri()], profile)
    assert _pdf_pages(pdf) == 1


def test_printed_sections_start_on_new_pages_without_navigation(site, tmp_path, profile):
    pdf = tmp_path / "all.pdf"
    _run(["--no-pdf-header-footer", f"--print-to-pdf={pdf}", (site / "index.html").as_uri()], profile)
    sections = (site / "index.html").read_text(encoding="utf-8").count("\n<section id=")
    assert _pdf_pages(pdf) >= sections
    css = (site / "index.html").read_text(encoding="utf-8")
    assert re.search(r"@media print \{.*?header\.site \.brand, header\.site nav \{ display: none; \}", css, re.S)


def test_young_ledger_pages_open_without_console_messages(young_site, shots, tmp_path, profile):
    """Every page of a young or odd ledger loads in Chromium with nothing on the console (no
    blocked load, no error); the overview is kept as screenshots at 1280 and 390 px."""
    name, site_dir = young_site.name, young_site.result.out_dir
    pages = sorted(site_dir.glob("*.html"))
    body = "".join(f'<iframe width="1280" height="600" srcdoc="{html.escape(p.read_text(encoding="utf-8"), quote=True)}">'
                   "</iframe>" for p in pages)
    wrapper = tmp_path / "all.html"
    wrapper.write_text(f"<!DOCTYPE html><html><body>{body}</body></html>", encoding="utf-8")
    done = _run(["--enable-logging=stderr", "--v=0", "--dump-dom", wrapper.as_uri()], profile)
    console = [line for line in done.stderr.splitlines() if ":CONSOLE" in line]
    assert not console, f"{name}: {console[:3]}"
    assert done.stdout.count("<iframe") == len(pages) >= 4
    for width in WIDTHS:
        png = shots / f"young-{name}-index-{width}.png"
        _run([f"--screenshot={png}", f"--window-size={width},1000", (site_dir / "index.html").as_uri()], profile)
        assert png.is_file() and png.stat().st_size > 5_000
