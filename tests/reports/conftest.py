"""The invented report ledger and its report, built once per session and shared by the report tests.

Building the ledger and rendering its report took several seconds of CPU each, and three modules
(test_report, test_report_browser, test_review) each did it again. The report opens the ledger
read-only, so one copy serves them all; a test that writes works on a copy (as reviewed_ledger is).
"""

from __future__ import annotations

import shutil

import pytest

from reports import render_report
from tests.reports.invented import AS_OF, INCUMBENT, build_ledger
from tests.reports.stored_reviews import store_reviews

# The title is markup on purpose: the report tests check that it is escaped.
TITLE = "Invented review <i>Q4</i>"


@pytest.fixture(scope="session")
def invented_ledger(tmp_path_factory):
    return build_ledger(tmp_path_factory.mktemp("invented") / "invented.duckdb")


@pytest.fixture(scope="session")
def reviewed_ledger(invented_ledger, tmp_path_factory):
    """A copy of the invented ledger (copying the file is cheaper than building it) with two reviews
    stored before the as-of, so the first screen lists what changed (test_review, the browser test)."""
    path = tmp_path_factory.mktemp("reviewed") / "invented.duckdb"
    assert not invented_ledger.with_name(invented_ledger.name + ".wal").exists(), "the ledger was not closed"
    shutil.copyfile(invented_ledger, path)
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
