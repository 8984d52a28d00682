"""Findings: what the ledger-level checks report, and the options (thresholds) they share.

A :class:`Finding` is one row of ``backsight flags``: a kind (drift, calibration, value, data),
where it applies (series, model, horizon, level), since when, one headline figure and a sentence
of evidence a reviewer can read aloud. The checks that produce findings live in
:mod:`ledger.findings.drift`, :mod:`ledger.findings.calibration`, :mod:`ledger.findings.value` and :mod:`ledger.findings.data`;
:mod:`ledger.findings.flags` runs them over a ledger.

Severity: ``alert`` (a test crossed its limit), ``watch`` (interval calibration in the watch
zone), ``note`` (a check could not judge: too few cells, no benchmark). Notes are listed too,
because a test that lacks the data to decide must say so.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterable, Sequence
from typing import Literal, get_args

import pandas as pd

from ..stats.signals import DRIFT_H
from ..errors import UnknownName
from ..store import Store
from ..wording import SEVERITY_ORDER, list_names

__all__ = [
    "FindingKind",
    "Severity",
    "Correction",
    "KINDS",
    "Finding",
    "FlagOptions",
    "FINDING_COLUMNS",
    "findings_frame",
    "about",
    "horizon_text",
    "known_models",
    "check_models",
]

FindingKind = Literal["drift", "calibration", "value", "data"]
Severity = Literal["alert", "watch", "note"]
Correction = Literal["bh", "holm"]
KINDS: tuple[str, ...] = get_args(FindingKind)


@dataclasses.dataclass(frozen=True)
class Finding:
    """One finding. ``series`` is '' for a model-level finding, ``model`` '' for a series-level one.

    ``horizon`` is the single horizon concerned (None when several are pooled, then
    ``horizons`` names them, e.g. "2-3" or "all"); ``level`` is the interval level in percent;
    ``since`` the period label when the problem started (or the first period looked at);
    ``raised`` the period at which a sequential test crossed its limit; ``figure`` the headline
    number, whose meaning ``measure`` names; ``p_value`` the (adjusted, where stated) p-value of
    the test behind the finding, NaN when the test has none; ``n`` the cells (or periods) used.
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
    severity: str = "alert"
    zone: str = ""
    horizons: str = ""
    raised: str = ""
    measure: str = ""
    p_value: float = math.nan
    n: int = 0


FINDING_COLUMNS: tuple[str, ...] = tuple(f.name for f in dataclasses.fields(Finding))


@dataclasses.dataclass(frozen=True)
class FlagOptions:
    """Every threshold of ``flags``, with its default (each is a CLI option of the same name).

    Drift (:mod:`ledger.findings.drift`): ``drift_k``, ``drift_h`` (CUSUM allowance and decision interval
    in reference standard deviations); ``reference`` (cells in the reference window; None = two
    seasons, at least 8); ``ts_window`` (tracking-signal window; None = one season, at least 6);
    ``trigg_alpha``.
    Calibration (:mod:`ledger.findings.calibration`): ``fdr`` (level of the false-finding control across all
    calibration tests), ``correction`` ("bh" Benjamini-Hochberg or "holm"), ``min_cells`` (fewer
    cells: "not enough data to judge"), ``series_calibration`` (also test each series),
    ``buckets`` (lower edges of the horizon buckets), ``zone_watch`` / ``zone_out`` (cumulative
    binomial probabilities that start the watch and out-of-tolerance zones).
    Value added (:mod:`ledger.findings.value`): ``benchmark`` (None = a model named like a seasonal-naive
    reference), ``recent`` (evaluation periods in the recent window), ``value_alpha``
    (significance for series-level value findings).
    Data (:mod:`ledger.findings.data`): ``seasons`` (history shorter than this many seasons at an
    origin is reported), ``adi`` (average demand interval at or above which demand is
    intermittent).
    """

    drift_k: float = 0.5
    drift_h: float = DRIFT_H
    reference: int | None = None
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
    """Findings as a frame, ordered by kind, severity, model, series, horizon, level."""
    rows = [dataclasses.asdict(f) for f in findings]
    frame = pd.DataFrame(rows, columns=list(FINDING_COLUMNS))
    frame["horizon"] = frame["horizon"].astype("Int64")
    frame["level"] = frame["level"].astype("float64")
    frame["figure"] = frame["figure"].astype("float64")
    frame["p_value"] = frame["p_value"].astype("float64")
    frame["n"] = frame["n"].astype("int64")
    order = pd.DataFrame({
        "k": frame["kind"].map({k: i for i, k in enumerate(KINDS)}),
        "s": frame["severity"].map(SEVERITY_ORDER),
    })
    frame = frame.assign(_k=order["k"], _s=order["s"])
    frame = frame.sort_values(["_k", "_s", "model", "series", "horizon", "level", "since"],
                              kind="stable", na_position="first")
    return frame.drop(columns=["_k", "_s"]).reset_index(drop=True)


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
