"""The invented report ledger, the young and odd ledgers, and their reports, built once per session
and shared by the report tests.

Building the ledger and rendering its report took several seconds of CPU each, and three modules
(test_report, test_report_browser, test_review) each did it again; the young ledgers were built and
rendered twice (test_young_ledgers, test_report_browser). The report opens the ledger read-only, so
one copy serves them all; a test that writes works on a copy (as reviewed_ledger is).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pytest

from reports import ReportResult, render_report
from tests.reports.invented import AS_OF, INCUMBENT, build_ledger
from tests.reports.stored_reviews import store_reviews
from tests.reports.young_ledgers import MATRIX
from tests.helpers import copy_ledger

# The title is markup on purpose: the report tests check that it is escaped.
TITLE = "Invented review <i>Q4</i>"


@pytest.fixture(scope="session")
def invented_ledger(tmp_path_factory):
    return build_ledger(tmp_path_factory.mktemp("invented") / "invented.duckdb")


@pytest.fixture(scope="session")
def reviewed_ledger(invented_ledger, tmp_path_factory):
    """A copy of the invented ledger (copying the file is cheaper than building it) with two reviews
    stored before the as-of, so the first screen lists what changed (test_review, the browser test)."""
    path = copy_ledger(invented_ledger, tmp_path_factory.mktemp("reviewed"))
    store_reviews(path)
    return path


@pytest.fixture(scope="session")
def invented_site(invented_ledger, tmp_path_factory):
    """(RenderResult, the progress calls) of the invented ledger's report."""
    out = tmp_path_factory.mktemp("invented-site") / "out"
    calls = []
    result = render_report(invented_ledger, out, as_of=AS_OF, title=TITLE, incumbent=INCUMBENT,
                           benchmark="snaive", progress=lambda *a: calls.append(a))
    return result, calls


@dataclass(frozen=True)
class YoungSite:
    """A young ledger, what its overview must say, and its rendered site (all read only)."""
    name: str
    says: list[str]
    ledger: Path
    result: ReportResult


@pytest.fixture(scope="session")
def young_sites(tmp_path_factory):
    """young_sites(name) -> the YoungSite of MATRIX[name], built and rendered on first use.

    A lookup rather than a parametrised session fixture: pytest reorders the items of a
    parametrised session fixture by parameter across modules, which would tear down and set up the
    browser module's own fixtures once per young ledger.
    """
    built: dict[str, YoungSite] = {}

    def site(name: str) -> YoungSite:
        if name not in built:
            root = tmp_path_factory.mktemp(f"young-{name}")
            says = MATRIX[name](root / "young.duckdb")
            result = render_report(root / "young.duckdb", root / "site", as_of=AS_OF, workers=0)
            built[name] = YoungSite(name, says, root / "young.duckdb", result)
        return built[name]

    return site


@pytest.fixture(params=sorted(MATRIX))
def young_site(request, young_sites) -> YoungSite:
    """Each young ledger's YoungSite in turn; the build shows as the setup of its first test."""
    return young_sites(request.param)
