"""The report in a real browser: headless Chromium renders pages at 1280 and 390 px wide.

Screenshots go to $BACKSIGHT_SCREENSHOTS (default: pytest's temporary folder). Chromium is
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
from tests.reports.test_report import AS_OF, INCUMBENT, build_ledger

pytestmark = pytest.mark.browser

WIDTHS = (1280, 390)
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
def site(tmp_path_factory) -> Path:
    root = tmp_path_factory.mktemp("browser")
    path = build_ledger(root / "invented.duckdb")
    return render_report(path, root / "site", as_of=AS_OF, incumbent=INCUMBENT, benchmark="snaive",
                         title="Invented review").out_dir


@pytest.fixture(scope="module")
def shots(tmp_path_factory) -> Path:
    folder = Path(os.environ.get("BACKSIGHT_SCREENSHOTS") or tmp_path_factory.mktemp("shots"))
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
def test_screenshot_is_not_blank(site, shots, tmp_path, kind, width):
    png = shots / f"report-{kind}-{width}.png"
    png.unlink(missing_ok=True)
    _run([f"--screenshot={png}", f"--window-size={width},1800", (site / PAGES[kind]).as_uri()], tmp_path / "profile")
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
def test_page_does_not_overflow_horizontally(site, tmp_path, kind):
    wrapper = tmp_path / "measure.html"
    wrapper.write_text(_measuring_page((site / PAGES[kind]).read_text(encoding="utf-8")), encoding="utf-8")
    dom = _run(["--window-size=1400,1000", "--dump-dom", wrapper.as_uri()], tmp_path / "profile").stdout
    found = dict(re.findall(r'data-(w\d+|control)="(\d+x\d+)"', dom))
    assert set(found) == {"w1280", "w390", "control"}, f"measurement missing from the DOM: {found}"
    scroll, client = map(int, found["control"].split("x"))
    assert scroll > client + 1000, "the control frame must overflow, or the measurement cannot see overflow"
    for width in WIDTHS:
        scroll, client = map(int, found[f"w{width}"].split("x"))
        assert client >= width - 20 and scroll <= client, f"{kind} at {width} px: content {scroll} px wide in {client} px"
