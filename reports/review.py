"""The review: the overview's first screen, decision first.

One line of as-of and scope; the advice (keep, replace, not enough evidence) in one sentence
that also says why it can differ from the accuracy ranking; the top findings across kinds,
ranked by severity and then impact, each with what to do; three to five headline figures,
each with its sample size; and, for a young or odd ledger, what is missing, in plain words.
"""

from __future__ import annotations

import dataclasses
import math

import pandas as pd

from .coverage import coverage_cell
from .data import LedgerData
from ledger.wording import num, pct, plural, severity_rank

from .text import coverage_words, is_small, sample_note

__all__ = ["TOP_FINDINGS", "HeadFigure", "Review", "TopFinding", "advice_sentence", "build_review", "missing_notes", "rank_flags"]

#: Findings on the first screen; the findings section and page list the rest.
TOP_FINDINGS = 5

#: What a reviewer does about a finding of each kind, when the finding carries no action of its own.
_ACTIONS = {
    "drift": "review this model's recent forecasts for the series and the inputs behind them",
    "calibration": "recalibrate the intervals (widen them if too narrow, narrow them if too wide)",
    "value": "question the step: the benchmark does as well at less cost",
    "data": "check the actuals and the series' history before trusting its scores",
}


@dataclasses.dataclass(frozen=True)
class HeadFigure:
    label: str
    value: str
    note: str        # whose figure, over what, and the sample size


@dataclasses.dataclass(frozen=True)
class TopFinding:
    severity: str
    kind: str
    subject: str
    series_href: str
    model_href: str
    evidence: str
    action: str


@dataclasses.dataclass(frozen=True)
class Review:
    scope: str
    verdict: str          # keep / replace / not enough evidence / no advice
    advice: str
    missing: list[str]
    findings: list[TopFinding]
    findings_total: int
    figures: list[HeadFigure]


def _f(x) -> float:
    return float(x) if x is not None and not pd.isna(x) else math.nan


def rank_flags(flags: pd.DataFrame) -> pd.DataFrame:
    """Flags by severity (``ledger.wording.severity_rank``), then impact (highest first) when the
    findings carry an ``impact`` column, else in the order given."""
    if flags.empty:
        return flags
    keys = pd.DataFrame({"s": flags["severity"].map(lambda s: severity_rank(s)) if "severity" in flags else 1,
                         "i": -pd.to_numeric(flags["impact"], errors="coerce").fillna(0) if "impact" in flags else 0,
                         "o": range(len(flags))}, index=flags.index)
    return flags.loc[keys.sort_values(["s", "i", "o"], kind="stable").index]


def build_review(data: LedgerData, ctx, counts: dict, period_range: tuple[str, str]) -> Review:
    """The first screen of the overview (``ctx``: the pages' shared :class:`reports.views.Context`)."""
    flags = rank_flags(data.findings.flags)
    verdict, advice = advice_sentence(data)
    return Review(scope=_scope(data, ctx, counts, period_range), verdict=verdict, advice=advice,
                  missing=missing_notes(data, counts), findings=_top(flags, ctx), findings_total=len(flags),
                  figures=_figures(data, counts, flags))


def _scope(data: LedgerData, ctx, counts: dict, period_range: tuple[str, str]) -> str:
    first, last = period_range
    periods = f"target periods {first} to {last}" if first != "–" else "no target period scored yet"
    return (f"As of {ctx.footer.as_of} · {plural(counts['series'], 'series', 'series')} · "
            f"{plural(counts['models'], 'model')} · {periods} · headline horizon {data.horizon} · "
            f"{ctx.footer.selection}")


def missing_notes(data: LedgerData, counts: dict) -> list[str]:
    """Plain sentences on what a young or odd ledger does not have yet (empty when complete)."""
    out = []
    if counts["runs"] == 0:
        out.append("No forecast has been recorded yet: record a run with backsight snapshot FILE.")
    if counts["series"] and not len(data.actuals):
        out.append("No actual has arrived yet: record them with backsight actuals FILE; forecasts are scored as they arrive.")
    elif counts["runs"] and counts["cells_scored"] == 0:
        out.append("No forecast has been scored yet: no actual has arrived for any forecast in the selection.")
    if counts["cells_scored"] and len(data.by_model_h) and data.by_model_h["mase"].isna().all():
        m = int(data.series["season_length"].mode().iloc[0]) if len(data.series) else 12
        out.append(f"There is not enough history to scale errors yet: MASE appears once a series has more than "
                   f"a season of actuals before a forecast's origin ({m + 1} actuals at season length {m}).")
    if len(data.models) == 1:
        out.append(f"The ledger has only one model ({data.models[0]}), so there is nothing to compare it with "
                   "and no replacement advice.")
    if counts["cells_scored"] and data.intervals.empty:
        out.append("The scored forecasts have no prediction intervals, so coverage and calibration cannot be judged.")
    return out


# ---------------------------------------------------------------- the advice sentence


def advice_sentence(data: LedgerData) -> tuple[str, str]:
    """(verdict, sentence): keep / replace / not enough evidence / no advice, and why, in one sentence."""
    advice = data.findings.advice
    if not len(data.models) or not len(data.by_model_h):
        return "not enough evidence", "Not enough evidence to advise yet: no forecast has been scored."
    if len(data.models) == 1:
        return "not enough evidence", f"Not enough evidence to advise: {data.models[0]} is the only model, with no challenger."
    if not data.incumbent:
        return "no advice", ("No advice: no incumbent model is named. Name the model in use with "
                             "report --incumbent MODEL, or store it with advise --incumbent MODEL --save.")
    if advice is None or advice.empty:
        return "not enough evidence", f"Not enough evidence to advise: no challenger shares scored cells with {data.incumbent}."
    rows = advice.to_dict("records")
    chosen = [r for r in rows if r["recommend"]]
    if chosen:
        best = min(chosen, key=lambda r: (_f(r["mase_challenger"]), r["challenger"]))
        return "replace", _sentence(str(best["advice"]))
    if all(r["reason"] == "not enough data" for r in rows):
        why = str(rows[0]["advice"]).split(": ", 1)[-1]
        return "not enough evidence", _sentence(f"not enough evidence to replace {data.incumbent} yet ({why}); "
                                                "keep it until the comparison can be tested")
    return "keep", _keep_sentence(data, rows)


def _sentence(text: str) -> str:
    text = text.strip()
    return text[:1].upper() + text[1:] + ("" if text.endswith(".") else ".")


_WHY = {
    "not significant": "its lead over the last {p} evaluation periods is not statistically significant (DM-HLN test), so the ranking may be chance",
    "not better": "over the last {p} evaluation periods it is not better than {inc}",
    "mixed by horizon": "it is significantly better at some horizons and worse at others",
    "mixed by series": "it is better on only a minority of series",
    "not enough data": "there are too few common evaluation periods to test it",
}


def _keep_sentence(data: LedgerData, rows: list[dict]) -> str:
    inc = data.incumbent
    top = _lowest_mase(data)
    by_challenger = {r["challenger"]: r for r in rows}
    if top is not None and top[0] != inc and top[0] in by_challenger:
        r = by_challenger[top[0]]
        why = _WHY.get(r["reason"], str(r["advice"]).split(": ", 1)[-1]).format(p=int(r["periods"]), inc=inc)
        inc_mase = _inc_mase(data)
        return (f"Keep {inc}: {top[0]} has the lowest MASE at horizon {data.horizon} over all scored periods "
                f"({num(top[1])} against {num(inc_mase)} for {inc}, {sample_note(top[2])}), but {why}; "
                f"a replacement needs a lead that is recent, significant and on most series.")
    return (f"Keep {inc}: it has the lowest MASE at horizon {data.horizon} over all scored periods, and no challenger "
            f"is both better over the recent window and significantly more accurate.")


def _lowest_mase(data: LedgerData) -> tuple[str, float, int] | None:
    part = data.by_model_h[(data.by_model_h["horizon"] == data.horizon) & data.by_model_h["mase"].notna()]
    if part.empty:
        return None
    r = part.sort_values(["mase", "model"]).iloc[0]
    return str(r["model"]), float(r["mase"]), int(r["n"])


def _inc_mase(data: LedgerData) -> float:
    part = data.by_model_h[(data.by_model_h["horizon"] == data.horizon) & (data.by_model_h["model"] == data.incumbent)]
    return _f(part["mase"].iloc[0]) if len(part) else math.nan


# ---------------------------------------------------------------- top findings and figures


def _picks(flags: pd.DataFrame) -> list[dict]:
    """The first screen's findings: the top of the ranking when findings carry an impact; without
    one, the most severe of each kind in turn, so that one prolific kind does not hide the others."""
    rows = flags.to_dict("records")
    if "impact" in flags.columns or len(rows) <= TOP_FINDINGS:
        return rows[:TOP_FINDINGS]
    top = min(severity_rank(r.get("severity")) for r in rows)
    queues: dict[str, list[dict]] = {}
    for r in rows:
        if severity_rank(r.get("severity")) == top:
            queues.setdefault(str(r.get("kind")), []).append(r)
    picked: list[dict] = []
    while len(picked) < TOP_FINDINGS and any(queues.values()):
        for queue in queues.values():
            if queue and len(picked) < TOP_FINDINGS:
                picked.append(queue.pop(0))
    rest = [r for r in rows if not any(r is p for p in picked)]
    return picked + rest[:TOP_FINDINGS - len(picked)]


def _top(flags: pd.DataFrame, ctx) -> list[TopFinding]:
    out = []
    for r in _picks(flags):
        series, model = _text(r.get("series")), _text(r.get("model"))
        where = [series or "all series", model]
        if not pd.isna(r.get("horizon")):
            where.append(f"h {int(r['horizon'])}")
        if not pd.isna(r.get("level")):
            where.append(f"{float(r['level']):g}% interval")
        evidence = _text(r.get("evidence"))
        action = _text(r.get("action")) or _ACTIONS.get(_text(r.get("kind")), "review the evidence")
        out.append(TopFinding(severity=_text(r.get("severity")), kind=_text(r.get("kind")),
                              subject=" · ".join(w for w in where if w), series_href=ctx.series_href.get(series, ""),
                              model_href=ctx.model_href.get(model, ""),
                              evidence=evidence.split(";", 1)[0], action=action))
    return out


def _text(v) -> str:
    return "" if v is None or (not isinstance(v, str) and pd.isna(v)) else str(v)


def _figures(data: LedgerData, counts: dict, flags: pd.DataFrame) -> list[HeadFigure]:
    figs = [HeadFigure("Forecasts scored", f"{counts['cells_scored']:,}",
                       f"{counts['cells_pending']:,} still await their actuals" + _excluded_note(data, counts))]
    w, head = data.window, data.headline
    span = f"last {plural(w.length, w.unit.rstrip('s'), w.unit)}" if w.first else ""
    if len(head) and w.first and head["mase"].notna().any():
        focus = data.incumbent if data.incumbent in set(head["model"]) else None
        ranked = head[head["mase"].notna()].sort_values(["mase", "model"])
        for model in ([focus] if focus else []) + [m for m in ranked["model"] if m != focus][:1]:
            r = head[head["model"] == model].iloc[0]
            role = "incumbent" if model == data.incumbent else "lowest MASE" if model == ranked["model"].iloc[0] else ""
            figs.append(HeadFigure(f"MASE, {model}", num(_f(r["mase"])),
                                   f"{role + ', ' if role else ''}h = {data.horizon}, {span}, {sample_note(int(r['n']))}"))
        figs += _coverage_figure(data, focus or str(ranked["model"].iloc[0]), span)
    urgent = int(sum(severity_rank(s) == 0 for s in flags["severity"])) if len(flags) and "severity" in flags else 0
    figs.append(HeadFigure("Findings to act on", f"{urgent:,}", f"of {plural(len(flags), 'finding')} in all"))
    return figs[:5]


def _excluded_note(data: LedgerData, counts: dict) -> str:
    """What the events did to the count: cells left out (and how to put them back), or put back."""
    if data.include_excluded:
        return "; cells of excluding events included (--include-excluded)"
    n = counts.get("cells_excluded", 0)
    return f"; {n:,} left out by events (--include-excluded scores them)" if n else ""


def _coverage_figure(data: LedgerData, model: str, span: str) -> list[HeadFigure]:
    counts = data.headline_intervals[data.headline_intervals["model"] == model]
    if counts.empty:
        return []
    level = 80.0 if (counts["level"] == 80).any() else float(counts["level"].iloc[0])
    n, misses = int(counts.loc[counts["level"] == level, "n"].sum()), int(counts.loc[counts["level"] == level, "misses"].sum())
    cell = coverage_cell(level, n, misses)
    words = coverage_words(cell.observed, level, cell.direction, cell.zone).split(" — ", 1)[-1]
    small = ", small sample" if is_small(n) else ""
    scored = data.headline.loc[data.headline["model"] == model, "n"]
    of = int(scored.iloc[0]) if len(scored) else n
    over = f" of {of:,} scored cells (the others have no bounds)" if n < of else ""
    return [HeadFigure(f"{level:g}% intervals held, {model}", pct(cell.observed, 0),
                       f"{words}; {span}, n = {n:,}{over}{small}")]
