"""``flags``: run the drift, calibration, quantile, value-added and data-quality checks over a ledger.

One call pulls the scored cells once (set-based SQL in :mod:`ledger.scoring.cells`), runs the
per-group statistics of :mod:`ledger.findings.drift`, :mod:`ledger.findings.calibration`, :mod:`ledger.findings.value` and
:mod:`ledger.findings.data`, and returns one row per finding (columns
:data:`ledger.findings.base.FINDING_COLUMNS`). A model filter restricts the findings to those
models; series-level data findings (model '') are kept for the series those models forecast.
"""

from __future__ import annotations

import dataclasses
import functools
from collections.abc import Sequence

import numpy as np
from ..lazy import pandas as pd

from .calibration import TEST_FIELDS, calibration_findings, level_tests
from .drift import drift_findings, sequence_tests
from ..errors import UnknownName
from .base import (
    KINDS,
    Finding,
    FlagOptions,
    check_models,
    findings_frame,
    known_models,
)
from .data import data_findings, series_models
from .quantiles import quantile_findings
from ..scoring.cells import Selection, cells_sql, interval_misses, interval_misses_sql, score_cells
from ..scoring.quantile_reads import quantile_cells
from ..scoring.attributes import check_attribute, series_attributes
from ..overrides import overrides_for, parse_overrides
from ..store import Store
from .value import value_findings

__all__ = ["flags", "count_by_group", "recent_window"]


def flags(store: Store, sel: Selection, *, kinds: Sequence[str] = KINDS, cells: pd.DataFrame | None = None,
          **thresholds) -> pd.DataFrame:
    """Findings of the given kinds for the models in ``sel`` (all when empty), at ``sel.as_of``.

    ``thresholds`` are the fields of :class:`ledger.findings.base.FlagOptions`, each with its default.
    ``cells``: the scored cells of ``sel`` for every model (``score_cells`` of ``sel`` with no
    model filter) when the caller already holds them; None reads them here.
    """
    kinds = _check_kinds(kinds)
    options = FlagOptions.from_keywords(**thresholds)
    given = None if options.adjusts is None else parse_overrides(filter(None, options.adjusts.split(",")))
    overrides = overrides_for(store, sel.as_of, given)
    check_models(store, list(sel.models) + ([options.benchmark] if options.benchmark else [])
                 + [name for pair in (given or {}).items() for name in pair])
    everyone = dataclasses.replace(sel, models=())
    seasons, freqs = _series_facts(store)
    found: list[Finding] = []
    if cells is None:
        cells = score_cells(store, everyone)
    subjects = list(sel.models) or known_models(store)
    recent_from, total = recent_window(cells[cells["model"].isin(subjects)], options.recent)
    if "drift" in kinds:
        found += drift_findings(cells, seasons, options, subjects=subjects, recent_from=recent_from, total=total,
                                tested=_tested_on_executors(store, everyone, subjects, options))
    if "calibration" in kinds:
        tested = _calibration_on_executors(store, sel, freqs, options, recent_from)
        if tested is None:
            tested = level_tests(interval_misses(store, sel), freqs, options, recent_from)
        found += calibration_findings(tested, options, total=total)
    if "quantiles" in kinds:
        found += quantile_findings(quantile_cells(store, sel), options)
    if "value" in kinds:
        found += value_findings(cells, subjects, known_models(store), options, total=total, overrides=overrides)
    if "data" in kinds:
        found += _data_for(store, sel, options)
    return findings_frame(found)


# The Spark schema of sequence_tests' rows (drift.SEQUENCE_COLUMNS).
_SEQUENCE_SCHEMA = ("model string, series string, horizon long, n long, judged boolean, p double, bias boolean, "
                    "start long, shift double, lrv double, phi double")


def _tested_on_executors(store: Store, sel: Selection, subjects: Sequence[str], options: FlagOptions):
    """The drift tests of every sequence, computed where the cells live when the store can run a
    function per group of a query's rows (a Spark lake: grouped pandas UDFs on the executors,
    one model × horizon per group); None for a ledger file, whose cells are tested in process."""
    apply_in_groups = getattr(store, "apply_in_groups", None)
    if apply_in_groups is None:
        return None
    sql, params = cells_sql(sel)
    query = (f"SELECT model, series, horizon, period_index, frequency, e, q FROM ({sql}) c "
             "WHERE list_contains($drift_models, model)")
    return apply_in_groups(query, {**params, "drift_models": list(subjects)}, keys=("model", "horizon"),
                           fn=functools.partial(sequence_tests, options=options), schema=_SEQUENCE_SCHEMA)


# The Spark schema of level_tests' rows (calibration.TEST_FIELDS).
_LEVEL_SCHEMA = ", ".join(f"{name} {dict(str='string', float='double', int='long')[kind]}" for name, kind in TEST_FIELDS)


def _calibration_on_executors(store: Store, sel: Selection, freqs: dict[str, str], options: FlagOptions,
                              recent_from: dict[str, int]):
    """The calibration tests and action figures, computed where the interval misses live when the
    store can run a function per group of a query's rows (a Spark lake: one model × level per
    grouped pandas UDF); None for a ledger file, whose misses are tested in process."""
    apply_in_groups = getattr(store, "apply_in_groups", None)
    if apply_in_groups is None:
        return None
    sql, params = interval_misses_sql(sel)
    return apply_in_groups(sql, params, keys=("model", "level"),
                           fn=functools.partial(level_tests, freqs=freqs, options=options, recent_from=recent_from),
                           schema=_LEVEL_SCHEMA)


def recent_window(cells: pd.DataFrame, recent: int) -> tuple[dict[str, int], float]:
    """(first period index of the recent window per frequency, sum of |e|/q over its cells).

    The recent window is the last ``recent`` target periods of each frequency; the sum, over
    cells with a scale, is the denominator of every finding's impact.
    """
    if cells.empty:
        return {}, float("nan")
    newest = cells.groupby("frequency")["period_index"].max()
    starts = {str(f): int(v) - recent + 1 for f, v in newest.items()}
    first = cells["frequency"].astype(object).map(starts).to_numpy(dtype=float)
    q = cells["q"].to_numpy(dtype=float, na_value=np.nan)
    e = cells["e"].to_numpy(dtype=float)
    keep = (cells["period_index"].to_numpy() >= first) & (q > 0)
    return starts, float(np.sum(np.abs(e[keep]) / q[keep]))


def _check_kinds(kinds: Sequence[str]) -> list[str]:
    chosen = [str(k).strip().lower() for k in kinds] or list(KINDS)
    unknown = [k for k in chosen if k not in KINDS]
    if unknown:
        raise UnknownName(f"flags: unknown kind {', '.join(unknown)}; use {', '.join(KINDS)}")
    return chosen


def _series_facts(store: Store) -> tuple[dict[str, int], dict[str, str]]:
    rows = store.con.execute("SELECT series, season_length, frequency FROM series").fetchall()
    return {s: int(m) for s, m, _ in rows}, {s: f for s, _, f in rows}


def _data_for(store: Store, sel: Selection, options: FlagOptions) -> list[Finding]:
    found = data_findings(store, sel, options)
    if not sel.models:
        return found
    pairs = series_models(store, sel)
    wanted = set(pairs.loc[pairs["model"].isin(sel.models), "series"])
    return [f for f in found if f.model in sel.models or (not f.model and f.series in wanted)]


def count_by_group(store: Store, frame: pd.DataFrame, attribute: str, as_of) -> pd.DataFrame:
    """Findings counted per value of a series attribute and kind (notes left out).

    A model-level finding (no series) is counted under "(all series)"; a series without that
    attribute under "(none)".
    """
    check_attribute(store, as_of, attribute, option="flags --by")
    attrs = series_attributes(store, as_of)
    groups = dict(zip(attrs["series"], attrs[attribute])) if attribute in attrs.columns else {}
    found = frame[frame["severity"] != "note"]
    group = [("(all series)" if not s else groups.get(s) or "(none)") for s in found["series"]]
    counts = (found.assign(**{attribute: group}).groupby([attribute, "kind"]).size()
              .rename("findings").reset_index())
    return counts.sort_values([attribute, "kind"], kind="stable").reset_index(drop=True)
