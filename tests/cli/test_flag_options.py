"""Every FlagOptions field is a ``flags`` option of the same name and default (issue 12 item 5),
and the parsed options reach ``Ledger.flags`` unchanged (the call is built from them)."""

from __future__ import annotations

import dataclasses

import typer

from ledger.cli import app
from ledger.cli.thresholds import cli_default, option_name
from ledger.findings.base import FlagOptions


def _flags_params():
    command = typer.main.get_command(app).commands["flags"]
    return {p.name: p for p in command.params}


def test_every_field_is_an_option_with_its_default():
    params = _flags_params()
    for field in dataclasses.fields(FlagOptions):
        assert field.name in params, field.name
        param = params[field.name]
        assert option_name(field.name) in param.opts, (field.name, param.opts)
        default = param.default.value if hasattr(param.default, "value") else param.default
        assert default == cli_default(field), field.name


def test_parsed_options_reach_the_api(monkeypatch, runner, tmp_path):
    import pandas as pd
    from ledger import Ledger
    path = tmp_path / "l.duckdb"
    with Ledger.open(path) as book:
        book.record_actuals(pd.DataFrame({"series": ["A"], "period": ["2026-01"], "actual": [1.0]}))
    seen = {}

    def fake(self, **kwargs):
        seen.update(kwargs)
        return pd.DataFrame(columns=["kind", "severity", "series", "model", "evidence"])

    monkeypatch.setattr(Ledger, "flags", fake)
    result = runner.invoke(app, ["--ledger", str(path), "flags", "--drift-h", "6.5", "--buckets", "1,3",
                                 "--correction", "holm", "--no-series-calibration", "--benchmark", "x"])
    assert result.exit_code == 0, result.output
    expected = {f.name: f.default for f in dataclasses.fields(FlagOptions)}
    expected.update(drift_h=6.5, buckets=(1, 3), correction="holm", series_calibration=False, benchmark="x")
    assert {k: seen[k] for k in expected} == expected
