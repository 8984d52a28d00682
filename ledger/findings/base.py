"""Findings: what the ledger-level checks report, and the options (thresholds) they share.

A :class:`Finding` is one row of ``backsight flags``: a kind (drift, calibration, value, data),
where it applies (series, model, horizon, level), since when, one headline figure and a sentence
of evidence a reviewer can read aloud. The checks that produce findings live in
:mod:`ledger.findings.drift`, :mod:`ledger.findings.calibration`, :mod:`ledger.findings.value` and :mod:`ledger.findings.data`;
:mod:`ledger.findings.flags` runs them over a ledger.

Severity says what to do: ``act`` (a change that costs accuracy now: fix or replace),
``watch`` (a real but smaller or not yet costly problem: look again next cycle), ``note``
(context: zeros, gaps, short history, a check that lacked the data to judge). Notes are
listed too, because a test that lacks the data to decide must say so.

Impact (:attr:`Finding.impact`) puts every kind on one scale: the excess scaled absolute error
the finding stands for, sum of |e|/q over the affected cells of the recent window minus what
those cells would have cost without the problem, in percent of the ledger's total sum of
|e|/q over the recent window (all scored cells of the models looked at). Per kind:
drift, the cost of the change since it started; calibration, the distance by which misses
beyond the nominal rate fell outside their intervals; value, the model's |e|/q above the
benchmark's on common cells; data, 0 (context). ``flags`` sorts by severity, then impact.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterable, Sequence
from typing import Literal, get_args

from ..lazy import pandas as pd

from ..stats.signals import DRIFT_H
from ..errors import UnknownName
from ..store import Store
from ..wording import SEVERITY_ORDER, list_names

__all__ = [
    "FindingKind",
    "Severity",
    "Correction",
    "KINDS",
    "OVER_BASE",
    "SEVERITIES",
    "SEVERITY_ORDER",
    "Finding",
    "FlagOptions",
    "FINDING_COLUMNS",
    "findings_frame",
    "about",
    "horizon_text",
    "known_models",
    "check_models",
]

FindingKind = Literal["drift", "calibration", "quantiles", "value", "data"]
Severity = Literal["act", "watch", "note"]
Correction = Literal["bh", "holm"]
KINDS: tuple[str, ...] = get_args(FindingKind)
#: The check of a value finding about an override against the model it adjusts (ledger/overrides.py).
OVER_BASE = "no value added over its base"
SEVERITIES: tuple[str, ...] = get_args(Severity)


@dataclasses.dataclass(frozen=True)
class Finding:
    """One finding. ``series`` is '' for a model-level finding, ``model`` '' for a series-level one.

    ``horizon`` is the single horizon concerned (None when several are pooled, then
    ``horizons`` names them, e.g. "2-3" or "all"); ``level`` is the interval level in percent;
    ``since`` the period label when the problem started (or the first period looked at);
    ``raised`` the period at which a sequential test crossed its limit; ``figure`` the headline
    number, whose meaning ``measure`` names; ``p_value`` the (adjusted, where stated) p-value of
    the test behind the finding, NaN when the test has none; ``n`` the cells (or periods) used.

    ``severity`` is ``act``, ``watch`` or ``note`` (see the module docstring). ``impact`` is the
    excess scaled absolute error the finding stands for, in percent of the ledger's total over
    the recent window (0 for notes; the module docstring defines it per kind). ``action`` is
    what to do, as a sentence; ``action_figure`` its headline number and ``action_measure``
    what that number is (e.g. "half-width factor", "MAE after a constant correction"); every
    act and watch finding has one. ``series_list`` names the series of a consolidated
    (model-level) finding, comma-separated. :attr:`key` is the finding's stable identity.
    """

    kind: str
    series: str
    model: str
    horizon: int | None
    level: float | None
    since: str
    figure: float
    evidence: str
    check: str
    severity: str = "act"
    zone: str = ""
    horizons: str = ""
    raised: str = ""
    measure: str = ""
    p_value: float = math.nan
    n: int = 0
    impact: float = 0.0
    action: str = ""
    action_figure: float = math.nan
    action_measure: str = ""
    series_list: str = ""

    @property
    def key(self) -> str:
        """Stable identity across monthly runs: kind|model|series|level|topic.

        Free of horizon, dates and figures, so the same problem keeps its key from one cycle to
        the next. ``level`` is the interval level in percent ('' when none); ``topic`` separates
        findings of one kind about the same subject: the data check (gap, zero actuals, ...), the
        calibration test (coverage or clustered misses), '' otherwise.
        """
        level = "" if self.level is None or not math.isfinite(self.level) else f"{self.level:g}"
        topic = self.check if self.kind == "data" else (
            "clustered" if self.check == "clustered misses" else "coverage" if self.kind == "calibration"
            else "base" if self.check == OVER_BASE else "")
        return "|".join((self.kind, self.model, self.series, level, topic))


FINDING_COLUMNS: tuple[str, ...] = tuple(f.name for f in dataclasses.fields(Finding)) + ("key",)


@dataclasses.dataclass(frozen=True)
class FlagOptions:
    """Every threshold of ``flags``, with its default (each is a CLI option of the same name).

    Drift (:mod:`ledger.findings.drift`): ``drift_k``, ``drift_h`` (allowance and decision
    interval, in long-run standard deviations, of the CUSUM that dates when a monitor would have
    sounded); ``ts_window`` (tracking-signal window; None = one season, at least 6);
    ``trigg_alpha``; drift tests share ``fdr`` and ``min_cells`` with calibration.
    Calibration (:mod:`ledger.findings.calibration`): ``fdr`` (level of the false-finding control across all
    calibration tests), ``correction`` ("bh" Benjamini-Hochberg or "holm"), ``min_cells`` (fewer
    cells: "not enough data to judge"), ``series_calibration`` (also test each series),
    ``buckets`` (lower edges of the horizon buckets), ``zone_watch`` / ``zone_out`` (cumulative
    binomial probabilities that start the watch and out-of-tolerance zones).
    Value added (:mod:`ledger.findings.value`): ``benchmark`` (None = a model named like a seasonal-naive
    reference), ``adjusts`` ("OVERRIDE=BASE" pairs, comma-separated: the overrides whose value over
    their base is judged; None = the relation recorded in the ledger, "" = none), ``recent`` (evaluation periods in the recent window), ``value_alpha``
    (significance for series-level value findings).
    Data (:mod:`ledger.findings.data`): ``seasons`` (history shorter than this many seasons at an
    origin is reported), ``adi`` (average demand interval at or above which demand is
    intermittent).
    """

    drift_k: float = 0.5
    drift_h: float = DRIFT_H
    ts_window: int | None = None
    trigg_alpha: float = 0.1
    fdr: float = 0.05
    correction: Correction = "bh"
    min_cells: int = 8
    series_calibration: bool = True
    buckets: tuple[int, ...] = (1, 2, 4, 7, 13)
    zone_watch: float = 0.95
    zone_out: float = 0.9999
    benchmark: str | None = None
    adjusts: str | None = None
    recent: int = 12
    value_alpha: float = 0.05
    seasons: int = 3
    adi: float = 1.32

    @classmethod
    def from_keywords(cls, **thresholds) -> "FlagOptions":
        """Options from keyword arguments; an unknown keyword raises UnknownName listing the known ones."""
        known = [f.name for f in dataclasses.fields(cls)]
        unknown = sorted(set(thresholds) - set(known))
        if unknown:
            raise UnknownName(f"flags: unknown threshold {', '.join(unknown)}; known thresholds: {', '.join(known)}")
        given = dict(thresholds)
        if "buckets" in given:
            given["buckets"] = tuple(sorted({int(b) for b in given["buckets"]}))
        options = cls(**given)
        options.validate()
        return options

    def validate(self) -> None:
        if self.correction not in get_args(Correction):
            raise UnknownName(f"flags: correction {self.correction!r} is unknown; use bh or holm")
        if not 0 < self.fdr < 1 or not 0 < self.value_alpha < 1:
            raise UnknownName(f"flags: fdr = {self.fdr} and value_alpha = {self.value_alpha} must lie in (0, 1)")
        if not self.buckets or self.buckets[0] != 1:
            raise UnknownName(f"flags: buckets {self.buckets} must start at horizon 1, e.g. 1,2,4,7,13")
        if self.min_cells < 2 or self.recent < 2 or self.seasons < 1:
            raise UnknownName(f"flags: min_cells = {self.min_cells} and recent = {self.recent} must be >= 2, "
                              f"seasons = {self.seasons} >= 1")


def findings_frame(findings: Iterable[Finding]) -> pd.DataFrame:
    """Findings as a frame, ranked: severity (act, watch, note), then impact (largest first),
    then kind, model, series, horizon, level (the count line is
    :func:`ledger.findings.summary.finding_counts`)."""
    found = list(findings)
    rows = [dataclasses.asdict(f) | {"key": f.key} for f in found]
    frame = pd.DataFrame(rows, columns=list(FINDING_COLUMNS))
    for name in ("level", "figure", "p_value", "impact", "action_figure"):
        frame[name] = frame[name].astype("float64")
    frame["horizon"] = frame["horizon"].astype("Int64")
    frame["n"] = frame["n"].astype("int64")
    frame = frame.assign(_s=frame["severity"].map(SEVERITY_ORDER), _i=-frame["impact"].fillna(0.0),
                         _k=frame["kind"].map({k: i for i, k in enumerate(KINDS)}))
    frame = frame.sort_values(["_s", "_i", "_k", "model", "series", "horizon", "level", "since"],
                              kind="stable", na_position="first")
    return frame.drop(columns=["_s", "_i", "_k"]).reset_index(drop=True)


def about(x: float) -> str:
    """An expected count for a sentence: whole numbers from 1 up, one decimal below."""
    return f"{x:.0f}" if x >= 1 else f"{x:.1f}"


def horizon_text(horizons: Sequence[int]) -> str:
    """'horizon 1', 'horizons 1–3', 'horizons 1, 3, 6–7' (consecutive runs become ranges)."""
    hs = sorted({int(h) for h in horizons})
    if len(hs) == 1:
        return f"horizon {hs[0]}"
    parts, start = [], 0
    for i in range(1, len(hs) + 1):
        if i == len(hs) or hs[i] != hs[i - 1] + 1:
            run = hs[start:i]
            parts.append(f"{run[0]}–{run[-1]}" if len(run) > 1 else str(run[0]))
            start = i
    return f"horizons {', '.join(parts)}"


def known_models(store: Store) -> list[str]:
    """Every model name with a run in the ledger, sorted."""
    return [r[0] for r in store.con.execute("SELECT DISTINCT model FROM runs ORDER BY model").fetchall()]


def check_models(store: Store, names: Iterable[str]) -> None:
    """Raise UnknownName for a model the ledger has no run of, listing the known models."""
    known = known_models(store)
    unknown = [n for n in names if n not in known]
    if unknown:
        listed = list_names(known, 20) if known else "none (record a run first)"
        raise UnknownName(f"unknown model {', '.join(map(repr, unknown))}; known models: {listed}")
