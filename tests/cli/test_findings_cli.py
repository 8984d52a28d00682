"""The flags, compare, standings and advise commands through the CLI runner: exit codes, csv
headers, error lines, and the incumbent setting checked afterwards through the API."""

from __future__ import annotations

import io
import json

import pandas as pd
import pytest

from ledger import Ledger
from ledger.cli import app

from tests.planted import build


@pytest.fixture(scope="module")
def path(tmp_path_factory):
    p = tmp_path_factory.mktemp("cli") / "l.duckdb"
    models = {"inc": {"sigma": 5.0, "width": 0.657}, "chal": {"sigma": 3.0}, "ref-snaive": {"sigma": 4.0}}
    build(p, n_series=10, horizons=(1, 2), seed=31, models=models).close()
    return str(p)


def _run(runner, path, *args):
    return runner.invoke(app, ["--ledger", path, *args])


def test_flags_csv(runner, path):
    result = _run(runner, path, "flags", "--format", "csv")
    assert result.exit_code == 0, result.output
    frame = pd.read_csv(io.StringIO(result.stdout), keep_default_na=False)
    assert list(frame.columns[:8]) == ["kind", "series", "model", "horizon", "level", "since", "figure", "evidence"]
    narrow = frame[(frame["model"] == "inc") & (frame["check"] == "too narrow") & (frame["series"] == "")]
    assert narrow["horizons"].astype(str).tolist() == ["1,2-3"]  # the planted narrow intervals, one finding
    value = frame[frame["kind"] == "value"]
    assert set(value["model"]) <= {"inc"}  # sd 5 against the benchmark's 4


def test_flags_filters_json_and_thresholds(runner, path):
    result = _run(runner, path, "flags", "--kind", "calibration", "--model", "chal", "--format", "json")
    assert result.exit_code == 0, result.output
    rows = json.loads(result.stdout)
    assert {r["kind"] for r in rows} <= {"calibration"} and {r["model"] for r in rows} <= {"chal"}
    strict = _run(runner, path, "flags", "--kind", "calibration", "--model", "inc", "--fdr", "0.0000001",
                  "--correction", "holm", "--no-series-calibration", "--buckets", "1", "--format", "csv")
    assert strict.exit_code == 0, strict.output
    frame = pd.read_csv(io.StringIO(strict.stdout), keep_default_na=False)
    assert set(frame["horizons"].astype(str)) <= {"1+"} and (frame["series"] == "").all()


def test_flags_table_and_errors(runner, path):
    table = _run(runner, path, "flags", "--kind", "value")
    assert table.exit_code == 0
    n = table.stdout.count("no value added")
    # the summary comes first; series where inc adds no value are evidence of its one finding
    assert n == 1 and table.stdout.splitlines()[0] == "1 finding: 1 act; 1 value"
    assert "1. value inc:" not in table.stdout                                   # sentences only with --long
    long = _run(runner, path, "flags", "--kind", "value", "--long")
    assert "1. value inc: no value added over ref-snaive in the last 12 evaluation periods" in long.stdout
    unknown = _run(runner, path, "flags", "--model", "zzz")
    assert unknown.exit_code == 1
    assert unknown.stderr.strip().splitlines() == ["Error: unknown model 'zzz'; known models: chal, inc, ref-snaive"]
    assert unknown.stdout == ""
    assert _run(runner, path, "flags", "--kind", "bias").exit_code == 2
    assert _run(runner, path, "flags", "--buckets", "1,x").exit_code == 2


def test_compare_csv_and_table(runner, path):
    result = _run(runner, path, "compare", "inc", "chal", "--format", "csv")
    assert result.exit_code == 0, result.output
    header = result.stdout.splitlines()[0].split(",")
    assert header[0] == "horizon"
    assert {"n", "mae_a", "mae_b", "rel_mae", "win_share_b", "dm_statistic", "p_value", "better"} <= set(header)
    frame = pd.read_csv(io.StringIO(result.stdout), keep_default_na=False)
    assert frame["better"].tolist() == ["chal", "chal"]
    one = _run(runner, path, "compare", "inc", "chal", "--horizon", "2")
    assert one.exit_code == 0
    assert one.stdout.strip().splitlines()[-1].startswith("Verdict: chal is more accurate than inc at horizon 2 (p < ")
    bad = _run(runner, path, "compare", "inc", "nope")
    assert bad.exit_code == 1
    assert bad.stderr.strip() == "Error: unknown model 'nope'; known models: chal, inc, ref-snaive"


def test_standings_csv(runner, path):
    result = _run(runner, path, "standings", "--horizon", "1", "--periods", "--format", "csv")
    assert result.exit_code == 0, result.output
    frame = pd.read_csv(io.StringIO(result.stdout))
    assert list(frame.columns) == ["period", "model", "rank", "mase", "series_won", "n", "n_series", "n_models"]
    assert frame["period"].nunique() == 36 and set(frame["n_models"]) == {3}


def test_advise_saves_the_incumbent(runner, tmp_path):
    p = tmp_path / "l.duckdb"
    build(p, n_series=10, horizons=(1,), seed=32, models={"inc": {"sigma": 5.0}, "chal": {"sigma": 3.0}}).close()
    missing = _run(runner, str(p), "advise")
    assert missing.exit_code == 1 and missing.stderr.startswith("Error: advise: no incumbent model")
    saved = _run(runner, str(p), "advise", "--incumbent", "inc", "--save")
    assert saved.exit_code == 0, saved.output
    assert "incumbent set to inc" in saved.stderr
    assert saved.stdout.strip().splitlines()[-1].startswith("replace inc with chal: better over the last 12")
    with Ledger.open(p, create=False) as book:
        assert book.incumbent == "inc"
    again = _run(runner, str(p), "advise", "--format", "csv")
    assert again.exit_code == 0
    frame = pd.read_csv(io.StringIO(again.stdout))
    assert frame[["incumbent", "challenger", "recommend"]].values.tolist() == [["inc", "chal", True]]
    assert _run(runner, str(p), "advise", "--save").exit_code == 2
