"""The command line in a terminal of 80 and 120 columns: lines fit, identifiers are never split,
the selection options give the API's numbers, unknown names are errors with the nearest names.

Invented data (tests/planted.py), with long series and model names so that tables must give way.
"""

from __future__ import annotations

import io
import re

import numpy as np
import pandas as pd
import pytest
from rich.cells import cell_len

from ledger import Ledger
from ledger.cli import app
from ledger.cli.terminal import error_lines

from tests import planted

MODELS = {"incumbent-holt-winters-monthly": {"sigma": 5.0, "width": 0.7},
          "challenger-damped-trend-weekly": {"sigma": 3.0},
          "ref-snaive": {"sigma": 4.0}}
REGIONS = ["coast", "inland", "north"]


def long_name(i: int) -> str:
    return f"{REGIONS[i % 3]}/garden-hoses-deluxe-{i:02d}"


@pytest.fixture(scope="module")
def path(tmp_path_factory):
    p = tmp_path_factory.mktemp("terminal") / "l.duckdb"
    n = 9
    y = planted.actuals(n, planted.HISTORY + 24, seed=5)
    rename = {planted.names(n)[i]: long_name(i) for i in range(n)}
    with Ledger.open(p) as book:
        book.record_actuals(planted.actual_frame(y).replace({"series": rename}))
        origins = range(planted.HISTORY - 1, planted.HISTORY + 23)
        for k, (model, spec) in enumerate(MODELS.items()):
            frame = planted.run_frame(y, origins=origins, horizons=(1, 2, 3), seed=50 + k, **spec)
            book.snapshot(frame.replace({"series": rename}), model=model)
        book.record_attributes(pd.DataFrame({"series": [long_name(i) for i in range(n)],
                                             "region": [REGIONS[i % 3] for i in range(n)]}))
    return str(p)


def _run(runner, path, *args, width=None):
    env = {"COLUMNS": str(width)} if width else {}
    return runner.invoke(app, ["--ledger", path, *args], env=env)


IDENTIFIERS = [long_name(i) for i in range(9)] + list(MODELS)
WORDS = {*REGIONS, "challenger", "incumbent"}     # whole words of their own, not pieces of a name
TABLE_COMMANDS = [
    ("scores",), ("scores", "--by", "series,model", "--metrics", "all"), ("runs",), ("flags",), ("flags", "--long"),
    ("compare", "incumbent-holt-winters-monthly", "challenger-damped-trend-weekly"),
    ("standings",), ("standings", "--periods"),
    ("advise", "--incumbent", "incumbent-holt-winters-monthly"),
    ("scores", "--totals", "region", "--by", "model,horizon"),
]


def _split_identifiers(text: str) -> list[str]:
    """Tokens that are a proper prefix of an identifier: the start of a name broken across lines."""
    bad = []
    for token in re.split(r"\s+", text):
        for name in IDENTIFIERS:
            if 3 <= len(token) < len(name) and name.startswith(token) and "…" not in token and token not in WORDS:
                bad.append(token)
    return bad


@pytest.mark.parametrize("width", [80, 120])
@pytest.mark.parametrize("args", TABLE_COMMANDS, ids=lambda a: " ".join(a[:2]))
def test_lines_fit_and_identifiers_are_whole(runner, path, width, args):
    result = _run(runner, path, *args, width=width)
    assert result.exit_code == 0, result.output
    lines = result.stdout.splitlines()
    assert lines, "no output"
    too_long = [line for line in lines if cell_len(line) > width]
    assert not too_long, too_long[:3]
    assert not _split_identifiers(result.stdout)


def test_wide_terminal_shows_names_in_full(runner, path):
    result = _run(runner, path, "scores", "--by", "series,model", width=200)
    assert result.exit_code == 0
    for name in IDENTIFIERS[:9]:
        assert name in result.stdout


def test_scores_compact_by_default_all_in_csv(runner, path):
    table = _run(runner, path, "scores", width=200)
    header = table.stdout.splitlines()[1].split()
    assert header == ["model", "horizon", "n", "mae", "mape", "mase", "bias_pct", "coverage_80", "n_80"]
    csv = pd.read_csv(io.StringIO(_run(runner, path, "scores", "--format", "csv").stdout))
    with Ledger.open(path, create=False, read_only=True) as book:
        full = book.scores()
    assert list(csv.columns) == list(full.columns)      # csv: every column, full precision
    np.testing.assert_array_equal(csv["mae"].to_numpy(), full["mae"].to_numpy())
    some = _run(runner, path, "scores", "--metrics", "rmse,smape", "--format", "csv")
    assert some.stdout.splitlines()[0] == "model,horizon,rmse,smape"
    bad = _run(runner, path, "scores", "--metrics", "rmse,smap")
    assert bad.exit_code == 1
    assert "unknown metric 'smap'" in bad.stderr and "did you mean 'smape'" in bad.stderr


FILTERS = ["--since", "2023-06", "--until", "2024-09", "--where", "region=coast", "--horizon", "1", "--horizon", "2"]
API_FILTERS = dict(since="2023-06", until="2024-09", where=["region=coast"], horizons=[1, 2])
A, B = "incumbent-holt-winters-monthly", "challenger-damped-trend-weekly"


def _csv(result) -> pd.DataFrame:
    assert result.exit_code == 0, result.output
    return pd.read_csv(io.StringIO(result.stdout), keep_default_na=False)


def _same(cli: pd.DataFrame, api: pd.DataFrame) -> None:
    api = pd.read_csv(io.StringIO(api.to_csv(index=False)), keep_default_na=False)   # the same typing as the CLI's
    assert len(cli) > 0
    pd.testing.assert_frame_equal(cli, api)


def test_filters_equal_the_api(runner, path):
    with Ledger.open(path, create=False, read_only=True) as book:
        want = {
            "scores": book.scores(**API_FILTERS),
            "compare": book.compare(A, B, **API_FILTERS),
            "standings": book.standings(**API_FILTERS),
            "advise": book.advise(A, window=6, **API_FILTERS),
            "flags": book.flags(**API_FILTERS),
            "series": book.scores(by=["series"], series=[long_name(0)], since="2024-01"),
            "runs": book.runs(models=[B]),
        }
        unfiltered = book.compare(A, B)
    _same(_csv(_run(runner, path, "scores", *FILTERS, "--format", "csv")), want["scores"])
    _same(_csv(_run(runner, path, "compare", A, B, *FILTERS, "--format", "csv")), want["compare"])
    _same(_csv(_run(runner, path, "standings", "--periods", *FILTERS, "--format", "csv")), want["standings"])
    _same(_csv(_run(runner, path, "advise", "--incumbent", A, "--window", "6", *FILTERS, "--format", "csv")),
          want["advise"])
    _same(_csv(_run(runner, path, "flags", *FILTERS, "--format", "csv")), want["flags"])
    _same(_csv(_run(runner, path, "scores", "--by", "series", "--series", long_name(0), "--since", "2024-01",
                    "--format", "csv")), want["series"])
    runs = _csv(_run(runner, path, "runs", "--model", B, "--format", "csv"))
    assert runs["run_id"].tolist() == want["runs"]["run_id"].tolist() and set(runs["model"]) == {B}
    # the filters do act: fewer common cells than without them
    assert want["compare"]["n"].sum() < unfiltered["n"].sum()
    assert set(want["standings"]["period"]) <= {planted.month(i) for i in range(41, 57)}


def test_flags_severity_and_kind_filters(runner, path):
    every = _csv(_run(runner, path, "flags", "--format", "csv"))
    alerts = _csv(_run(runner, path, "flags", "--severity", "act", "--kind", "calibration", "--format", "csv"))
    want = every[(every["severity"] == "act") & (every["kind"] == "calibration")].reset_index(drop=True)
    _same(alerts, want)


@pytest.mark.parametrize("args, message", [
    (("scores", "--model", "incumbent-holt-winters-MONTHLY"),
     "did you mean 'incumbent-holt-winters-monthly'?"),
    (("scores", "--series", "coast/garden-hose-deluxe-00"), "did you mean 'coast/garden-hoses-deluxe-00'"),
    (("scores", "--horizon", "0"), "--horizon 0: no run has this horizon; horizons in the ledger: 1–3"),
    (("scores", "--where", "region=cost"), "--where region=cost: unknown region value 'cost'; did you mean "
                                           "'coast'? known region values: coast, inland, north"),
    (("compare", A, B, "--series", "north/garden"), "unknown series 'north/garden'"),
    (("standings", "--model", "ref-snaiv"), "unknown model 'ref-snaiv'; did you mean 'ref-snaive'? known models: "),
    (("flags", "--where", "zone=x"), "--where: no attribute named 'zone'; known attributes: region"),
    (("advise", "--incumbent", A, "--horizon", "7"), "--horizon 7: no run has this horizon"),
    (("runs", "--model", "ref-naive"), "unknown model 'ref-naive'"),
])
def test_unknown_names_are_errors(runner, path, args, message):
    result = _run(runner, path, *args)
    assert result.exit_code == 1, result.output
    assert len(result.stderr.splitlines()) == 1 and result.stderr.startswith("Error: ")
    assert message in result.stderr, result.stderr


def test_empty_but_valid_selection_is_a_note(runner, path):
    result = _run(runner, path, "scores", "--since", "2030-01")
    assert result.exit_code == 0 and result.stdout == ""
    assert "no scored cells" in result.stderr


def test_help_has_no_internal_metavars(runner):
    import typer
    names = sorted(typer.main.get_command(app).commands)
    for name in [None, *names]:
        result = runner.invoke(app, [name, "--help"] if name else ["--help"], env={"COLUMNS": "100"})
        assert result.exit_code == 0
        for bad in ("list[", "<int", "{", "<str>", "<path>", "<float>"):
            assert bad not in result.stdout, (name, bad)


def test_a_wrapped_list_item_hangs_under_its_text():
    from ledger.cli.terminal import wrap
    item = "  2. act drift m: forecasts too high on 9 series from about 2023-02: a/b, c/d, e/f"
    assert wrap(item, 40) == ["  2. act drift m: forecasts too high on",
                              "     9 series from about 2023-02: a/b,",
                              "     c/d, e/f"]
    assert wrap("plain words here", 10) == ["plain", "words here"]


def test_a_long_command_breaks_with_shell_continuations():
    from ledger.cli.terminal import command_lines
    cmd = "  backsight --ledger some/where/demo.duckdb compare incumbent-hw challenger-damped"
    lines = command_lines(cmd, 50)
    assert lines == ["  backsight --ledger some/where/demo.duckdb \\",
                     "      compare incumbent-hw challenger-damped"]
    assert command_lines(cmd, 200) == [cmd]


def test_flags_help_names_every_kind_and_severity(runner):
    from ledger.cli.findings import Kind, SeverityOpt
    text = " ".join(runner.invoke(app, ["flags", "--help"], env={"COLUMNS": "200"}).stdout.split())
    assert "drift, calibration, quantiles, value or data" in text and "act, watch or note" in text
    assert [k.value for k in Kind] == ["drift", "calibration", "quantiles", "value", "data"]
    assert [s.value for s in SeverityOpt] == ["act", "watch", "note"]


class _Stream(io.StringIO):
    def __init__(self, tty: bool):
        super().__init__()
        self.tty = tty

    def isatty(self) -> bool:
        return self.tty


@pytest.mark.parametrize("width", [80, 120])
def test_error_lines_fit_a_terminal_and_stay_one_line_in_a_pipe(monkeypatch, width):
    path = "/data/" + "deep/" * 20 + "forecasts.csv"          # 111 characters: wider than either width
    names = ", ".join(f"north/series-{i}" for i in range(20))
    message = (f"Error: unknown series 'north/hose'; did you mean 'north/hoses'? known series: {names}\n"
               f"{path} row 7 column period: 'x' is not a monthly label")
    monkeypatch.setenv("COLUMNS", str(width))
    assert error_lines(message, _Stream(tty=False)) == message.split("\n")
    lines = error_lines(message, _Stream(tty=True))
    assert len(lines) > 2
    # every line fits except the one that holds the path alone, which is never cut
    assert all(len(line) <= width for line in lines if path not in line)
    assert any(line.strip() == path for line in lines)
    # nothing lost, nothing split: the words come back in order
    assert " ".join(" ".join(lines).split()) == " ".join(message.split())
    starts = [i for i, line in enumerate(lines) if line.startswith(("Error:", path))]
    assert starts == [0, starts[1]] and all(line.startswith("  ") for i, line in enumerate(lines) if i not in starts)
