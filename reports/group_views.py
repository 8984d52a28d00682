"""The groups page (``groups.html``, ``render_report(..., group_by=ATTR)``): accuracy per value of a series attribute.

Data come from the ledger's public group API at the report's as-of: ``Ledger.scores(by=[ATTR,
"model"], weight="volume")`` (unweighted and volume-weighted figures side by side),
``Ledger.totals(ATTR)`` (the groups' totals), ``Ledger.attributes()`` (which series belong to
which group) and the findings counted per group and kind by :func:`ledger.findings.flags.count_by_group`
(what ``Ledger.flag_counts`` calls) on the findings the report already computed, so the checks
run once. A series without the attribute is in the group "(none)", as in ``flags --by``.

Sign convention: e = actual − forecast, so a positive bias (and weighted bias) is "too low".
"""

from __future__ import annotations

import dataclasses
import datetime as dt
import math

import pandas as pd

from ledger import Ledger
from ledger.findings.flags import count_by_group
from ledger.scoring.attributes import check_attribute
from ledger.scoring.totals import INTERVAL_NOTE
from ledger.wording import num, plural

from .charts import Chart
from .group_charts import MAX_GROUPS_DRAWN, group_bars_chart
from .text import bias_words, is_small
from .views import Context, Link

__all__ = [
    "GROUPS_PAGE",
    "NO_GROUP",
    "FindingCount",
    "GroupData",
    "GroupMembers",
    "GroupMetric",
    "GroupsView",
    "TotalRow",
    "build_groups",
    "check_group_by",
    "count_findings",
    "load_groups",
]

GROUPS_PAGE = "groups.html"
NO_GROUP = "(none)"          # the label ledger.findings.flags.count_by_group gives series without the attribute


@dataclasses.dataclass(frozen=True)
class GroupData:
    """The frames of the groups page, all at the report's as-of."""

    attribute: str
    scores: pd.DataFrame          # Ledger.scores(by=[attribute, "model"], weight="volume")
    totals: pd.DataFrame          # Ledger.totals(attribute)
    members: pd.DataFrame         # series, group (NO_GROUP when the series has no value)
    findings: pd.DataFrame | None  # attribute, kind, findings (None until counted)


@dataclasses.dataclass(frozen=True)
class GroupMetric:
    group: str
    anchor: str
    model: str
    model_href: str
    n: int
    mape: float
    mase: float
    wape: float
    bias_pct: float
    bias_text: str
    wmape: float
    wmase: float
    wbias_pct: float
    wbias_text: str
    weight_total: float
    small: bool


@dataclasses.dataclass(frozen=True)
class TotalRow:
    group: str
    anchor: str
    model: str
    model_href: str
    forecast_of: str
    n: int
    mape: float
    mase: float
    wape: float
    bias_pct: float
    bias_text: str
    n_left_out: int
    small: bool


@dataclasses.dataclass(frozen=True)
class FindingCount:
    group: str
    anchor: str                   # "" for "(all series)": model-level findings have no group section
    counts: list[int]             # aligned with GroupsView.kinds
    total: int


@dataclasses.dataclass(frozen=True)
class GroupMembers:
    group: str
    anchor: str
    series: list[Link]            # href "" when the series has no page (not in the ledger at the as-of)


@dataclasses.dataclass(frozen=True)
class GroupsView:
    attribute: str
    summary: list[str]
    weighting: str
    weighting_note: str
    rows: list[GroupMetric]
    chart: Chart | None
    chart_note: str
    totals: list[TotalRow]
    totals_note: str
    kinds: list[str]
    finding_counts: list[FindingCount]
    members: list[GroupMembers]


# ---------------------------------------------------------------- data


def check_group_by(book: Ledger, attribute: str, as_of: dt.datetime) -> str:
    """The attribute name (lower case, as stored) if recorded at the as-of; else the ledger's UnknownName."""
    return check_attribute(book.store, as_of, attribute.strip().lower(), option="--group-by")


def load_groups(book: Ledger, attribute: str, *, as_of: dt.datetime, since: str | None,
                until: str | None, include_excluded: bool = False) -> GroupData:
    """Scores, totals and members of each group (findings are counted later, by :func:`count_findings`).
    ``include_excluded`` reaches the scores; group totals always leave excluded cells out
    (``Ledger.totals`` has no such option)."""
    attribute = check_group_by(book, attribute, as_of)
    q = dict(as_of=as_of, since=since, until=until)
    attrs = book.attributes(as_of=as_of)
    members = pd.DataFrame({"series": attrs["series"].astype(str),
                            "group": [_label(v) for v in attrs[attribute]]})
    return GroupData(attribute=attribute,
                     scores=book.scores(by=[attribute, "model"], weight="volume", include_excluded=include_excluded, **q),
                     totals=book.totals(attribute, **q), members=members, findings=None)


def count_findings(book: Ledger, data: GroupData, flags: pd.DataFrame, as_of: dt.datetime) -> GroupData:
    """``data`` with the report's findings counted per group and kind (notes left out, as in ``flags --by``)."""
    return dataclasses.replace(data, findings=count_by_group(book.store, flags, data.attribute, as_of))


def _label(value) -> str:
    return NO_GROUP if value is None or (not isinstance(value, str) and pd.isna(value)) else str(value)


def _f(x) -> float:
    return float(x) if x is not None and not pd.isna(x) else math.nan


# ---------------------------------------------------------------- view


def build_groups(data: GroupData, ctx: Context) -> GroupsView:
    """The groups page: accuracy table and chart, totals, findings per group and kind, members."""
    anchors = _anchors(data)
    rows = _metric_rows(data, ctx, anchors)
    weighting = str(data.scores["weighting"].iloc[0]) if len(data.scores) else ""
    chart, chart_note = _chart(data, rows, ctx)
    kinds, counts = _finding_counts(data, anchors)
    return GroupsView(
        attribute=data.attribute, summary=_summary(data, anchors), weighting=weighting,
        weighting_note=_weighting_note(weighting), rows=rows, chart=chart, chart_note=chart_note,
        totals=_total_rows(data, ctx, anchors), totals_note=_totals_note(data.attribute),
        kinds=kinds, finding_counts=counts, members=_members(data, ctx, anchors))


def _anchors(data: GroupData) -> dict[str, str]:
    """Fragment id of each group's section: "g-<position>", never derived from the (user-supplied) value."""
    groups = set(data.members["group"])
    groups |= {_label(v) for v in data.scores[data.attribute]} if len(data.scores) else set()
    ordered = sorted(groups - {NO_GROUP}) + ([NO_GROUP] if NO_GROUP in groups else [])
    return {g: f"g-{i}" for i, g in enumerate(ordered)}


def _row_keys(r: dict, data: GroupData, ctx: Context, anchors: dict[str, str]) -> dict[str, str]:
    """Group, its section anchor, model and its page link: the first fields of every group row."""
    group, model = _label(r[data.attribute]), str(r["model"])
    return {"group": group, "anchor": anchors.get(group, ""), "model": model,
            "model_href": ctx.model_href.get(model, "")}


def _metric_rows(data: GroupData, ctx: Context, anchors: dict[str, str]) -> list[GroupMetric]:
    out = []
    for r in data.scores.to_dict("records"):
        out.append(GroupMetric(
            **_row_keys(r, data, ctx, anchors), n=int(r["n"]), mape=_f(r["mape"]), mase=_f(r["mase"]), wape=_f(r["wape"]),
            bias_pct=_f(r["bias_pct"]), bias_text=bias_words(_f(r["bias_pct"])), wmape=_f(r["wmape"]),
            wmase=_f(r["wmase"]), wbias_pct=_f(r["wbias_pct"]), wbias_text=bias_words(_f(r["wbias_pct"])),
            weight_total=_f(r["weight_total"]), small=is_small(int(r["n"]))))
    return out


def _total_rows(data: GroupData, ctx: Context, anchors: dict[str, str]) -> list[TotalRow]:
    out = []
    for r in data.totals.to_dict("records"):
        out.append(TotalRow(
            **_row_keys(r, data, ctx, anchors), forecast_of=str(r["forecast_of"]), n=int(r["n"]), mape=_f(r["mape"]), mase=_f(r["mase"]),
            wape=_f(r["wape"]), bias_pct=_f(r["bias_pct"]), bias_text=bias_words(_f(r["bias_pct"])),
            n_left_out=int(r["n_left_out"]), small=is_small(int(r["n"]))))
    return out


def _summary(data: GroupData, anchors: dict[str, str]) -> list[str]:
    attr = data.attribute
    named = [g for g in anchors if g != NO_GROUP]
    bare = int((data.members["group"] == NO_GROUP).sum())
    lines = [f"{plural(len(data.members) - bare, 'series', 'series')} carry a {attr} value, in "
             f"{plural(len(named), 'group')}. Accuracy figures pool every horizon over the report's target periods."]
    if bare:
        lines.append(f"{plural(bare, 'series', 'series')} with other attributes but no {attr} "
                     f"{'is' if bare == 1 else 'are'} listed under {NO_GROUP}; series with no attribute "
                     "at all are in no group.")
    if not len(data.scores):
        lines.append("No forecast of a series with this attribute has been scored yet.")
    return lines


def _weighting_note(weighting: str) -> str:
    if not weighting:
        return "No forecast has been scored, so there is nothing to weigh."
    return ("Weighted columns (wMAPE, wMASE, weighted bias) are Σ w·M / Σ w over the group's series, "
            "where M is the series' own figure and w its weight (series with no volume are left out); "
            f"weighting: {weighting}.")


def _totals_note(attr: str) -> str:
    return (f"Each {attr}'s total is the sum of its members' forecasts scored against the sum of their actuals, "
            "per model, origin and target period, using only the target periods where every member has both "
            "a forecast and an actual; “left out” counts the others. A series declared as a direct forecast "
            f"of the total appears as “direct”. Only point metrics: {INTERVAL_NOTE}; adding them would assume "
            "the members' errors move perfectly together, and the members' joint distribution is not in the "
            "ledger, so a total's interval cannot be scored from its members' intervals.")


def _finding_counts(data: GroupData, anchors: dict[str, str]) -> tuple[list[str], list[FindingCount]]:
    frame = data.findings
    if frame is None or not len(frame):
        return [], []
    kinds = sorted(frame["kind"].astype(str).unique())
    table = frame.pivot_table(index=data.attribute, columns="kind", values="findings", aggfunc="sum", fill_value=0)
    out = []
    for group in table.index:
        counts = [int(table.at[group, k]) if k in table.columns else 0 for k in kinds]
        out.append(FindingCount(str(group), anchors.get(str(group), ""), counts, sum(counts)))
    return kinds, out


def _members(data: GroupData, ctx: Context, anchors: dict[str, str]) -> list[GroupMembers]:
    by_group = {g: sorted(part["series"]) for g, part in data.members.groupby("group", sort=False)}
    return [GroupMembers(g, anchor, [Link(s, ctx.series_href.get(s, "")) for s in by_group.get(g, [])])
            for g, anchor in anchors.items()]


# ---------------------------------------------------------------- chart


def _chart(data: GroupData, rows: list[GroupMetric], ctx: Context) -> tuple[Chart | None, str]:
    """MASE by group per model (bars), volume-weighted MASE marked on each bar."""
    if not rows:
        return None, "No chart: no forecast of a series with this attribute has been scored yet."
    attr = data.attribute
    size: dict[str, int] = {}
    for r in rows:
        size[r.group] = size.get(r.group, 0) + r.n
    drawn = sorted(size, key=lambda g: (-size[g], g))[:MAX_GROUPS_DRAWN]
    groups = [g for g in _anchors(data) if g in drawn]
    models = [m for m in ctx.styles if any(r.model == m for r in rows)]
    cell = {(r.group, r.model): r for r in rows}
    values = {m: [cell[(g, m)].mase if (g, m) in cell else math.nan for g in groups] for m in models}
    weighted = {m: [cell[(g, m)].wmase if (g, m) in cell else math.nan for g in groups] for m in models}
    note = "" if len(groups) == len(size) else (
        f"The chart draws the {len(groups):,} groups with the most scored forecasts; the table lists all {len(size):,}.")
    words = "; ".join(f"{g}: " + ", ".join(f"{m} {num(cell[(g, m)].mase)} (weighted {num(cell[(g, m)].wmase)})"
                                           for m in models if (g, m) in cell) for g in groups)
    title = f"MASE by {attr} and model, all horizons"
    summary = (f"One bar per model in each {attr}: MASE over its scored forecasts; the white diamond is the "
               f"volume-weighted MASE; the dashed line is MASE 1, the in-sample seasonal-naive error. {words}.")
    chart = group_bars_chart("c-groups", title, summary, groups, values, weighted, ctx.styles,
                             ylabel="MASE (scaled error, lower is better)", xlabel=f"{attr} (attribute value)",
                             weighted_label="volume-weighted MASE")
    return chart, note
