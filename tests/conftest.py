"""Shared fixtures: a fresh ledger path, the CLI runner, the demo built once (helpers live in tests/helpers.py).

Hypothesis draws 50 examples per property test in the default run (what CI runs); set
BACKSIGHT_HYPOTHESIS=thorough for 1,000 per test, a longer search before a release. The tests
set no example count of their own, so the profile decides for all of them.
"""

from __future__ import annotations

import os

import pytest
from hypothesis import settings
from typer.testing import CliRunner

# deadline=None: the machines that run the suite are shared, and a slow example is not a failure
settings.register_profile("default", max_examples=50, deadline=None)
settings.register_profile("thorough", max_examples=1000, deadline=None)
settings.load_profile(os.environ.get("BACKSIGHT_HYPOTHESIS", "default"))


@pytest.fixture
def ledger_path(tmp_path):
    return tmp_path / "test.duckdb"


@pytest.fixture
def runner():
    return CliRunner()


@pytest.fixture(scope="session")
def demo_site(tmp_path_factory):
    """The demo built once per test session (replay + report), shared by the demo tests."""
    from reports.demo import build_demo
    out = tmp_path_factory.mktemp("demo-site")
    return out, build_demo(out)
