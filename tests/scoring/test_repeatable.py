"""Scores are reproducible byte for byte: the same ledger gives the same CSV on every run.

Before the cells were aggregated in a fixed order on one thread (ledger/scoring/repeatable.py),
four runs of ``scores --by model,horizon --format csv`` on the demo ledger printed four
different files (last-digit float differences from DuckDB's parallel sums).
"""

from __future__ import annotations

import duckdb
import pytest

from ledger.cli import app
from ledger.scoring.repeatable import one_thread


@pytest.mark.parametrize("by", ["model,horizon", "series,model", "model,period"])
def test_scores_csv_is_the_same_on_every_run(demo_site, runner, by):
    _, result = demo_site
    args = ["--ledger", str(result.replay.ledger_path), "scores", "--by", by, "--format", "csv"]
    outputs = set()
    for _ in range(4):
        run = runner.invoke(app, args)
        assert run.exit_code == 0, run.stderr
        outputs.add(run.stdout)
    assert len(outputs) == 1
    assert outputs.pop().count("\n") > 10     # groups were scored, not an empty table


def test_one_thread_restores_the_thread_count():
    con = duckdb.connect()
    con.execute("SET threads = 3")
    with one_thread(con):
        assert con.execute("SELECT current_setting('threads')").fetchone()[0] == 1
    assert con.execute("SELECT current_setting('threads')").fetchone()[0] == 3
    with pytest.raises(duckdb.Error), one_thread(con):
        con.execute("SELECT * FROM no_such_table")
    assert con.execute("SELECT current_setting('threads')").fetchone()[0] == 3
