"""Model comparison over the ledger: compare two models, standings over time, replacement advice.

Convention (as in :mod:`ledger.stats.comparison`): a is the incumbent or reference, b the challenger;
loss differentials d = loss_a - loss_b (positive: b more accurate); relative MAE = MAE_b / MAE_a
(below 1: b more accurate). Everything is computed on *common cells*: the (series, target
period, horizon) cells that both models forecast and that have an actual. The scale q of a cell
depends only on its series and origin, so both models' scaled errors share it.

Loss for the tests: absolute scaled error |e| / q (cells without a scale are left out of the
scaled figures and the test). The Diebold-Mariano series at horizon h is the cross-sectional
mean loss differential per target period, d_t = mean over series of (|e_a| - |e_b|) / q,
ordered by target period, tested with h - 1 autocovariances and the Harvey-Leybourne-Newbold
correction (:func:`ledger.stats.comparison.dm_hln`).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np
from ..lazy import pandas as pd

from ..stats.comparison import DMResult, dm_hln, relative_mae, win_share
from ..errors import LedgerError
from .base import check_models, horizon_text, known_models
from ..wording import label, pval, short_num
from ..scoring.cells import Selection, score_cells
from ..store import Store

__all__ = ["paired", "period_differential", "compare", "standings", "advise", "COMPARE_COLUMNS",
           "STANDINGS_COLUMNS", "ADVICE_COLUMNS", "INCUMBENT_KEY"]

INCUMBENT_KEY = "incumbent"
COMPARE_COLUMNS = ("horizon", "n", "periods", "mae_a", "mae_b", "mase_a", "mase_b", "rel_mae",
                   "win_share_b", "dm_statistic", "p_value", "better", "verdict")
STANDINGS_COLUMNS = ("period", "model", "rank", "mase", "series_won", "n", "n_series", "n_models")
ADVICE_COLUMNS = ("incumbent", "challenger", "recommend", "reason", "periods", "rel_mae",
                  "mase_incumbent", "mase_challenger", "series_won", "horizons_better",
                  "horizons_worse", "horizons_unclear", "advice")


def paired(cells: pd.DataFrame, a: str, b: str) -> pd.DataFrame:
    """Common cells of models a and b: series, period_index, horizon, frequency, e_a, e_b, q, loss_a, loss_b."""
    keys = ["series", "period_index", "horizon"]
    left = cells.loc[cells["model"] == a, keys + ["frequency", "e", "q"]]
    right = cells.loc[cells["model"] == b, keys + ["e"]]
    pairs = left.merge(right, on=keys, suffixes=("_a", "_b"))
    q = pairs["q"].to_numpy(dtype=float, na_value=np.nan)
    with np.errstate(divide="ignore", invalid="ignore"):
        scale = np.where(q > 0, q, np.nan)
        pairs["loss_a"] = np.abs(pairs["e_a"].to_numpy(dtype=float)) / scale
        pairs["loss_b"] = np.abs(pairs["e_b"].to_numpy(dtype=float)) / scale
    return pairs.sort_values(keys, kind="stable").reset_index(drop=True)


def period_differential(pairs: pd.DataFrame) -> np.ndarray:
    """d_t = mean over series of loss_a - loss_b per target period, in period order (scaled cells only)."""
    d = pairs["loss_a"].to_numpy(dtype=float) - pairs["loss_b"].to_numpy(dtype=float)
    ok = ~np.isnan(d)
    _, where = np.unique(pairs["period_index"].to_numpy()[ok], return_inverse=True)
    if where.size == 0:
        return np.empty(0)
    return np.bincount(where, weights=d[ok]) / np.bincount(where)


def _series_mae(pairs: pd.DataFrame) -> pd.DataFrame:
    return pairs.assign(abs_a=pairs["e_a"].abs(), abs_b=pairs["e_b"].abs()).groupby("series").agg(
        mae_a=("abs_a", "mean"), mae_b=("abs_b", "mean"), n=("abs_a", "size"))


def _outcome(dm: DMResult, alpha: float) -> str:
    if not math.isfinite(dm.p_value):
        return "untestable"
    if dm.p_value < alpha:
        return "b" if dm.statistic > 0 else "a"
    return "none"


def _p_band(ps: Sequence[float]) -> str:
    worst = max(ps)
    return "p < 0.001" if worst < 0.001 else "p < 0.01" if worst < 0.01 else "p < 0.05"


# ---------------------------------------------------------------- compare


def compare(store: Store, sel: Selection, a: str, b: str, *, horizons: Sequence[int] = (),
            alpha: float = 0.05, cells: pd.DataFrame | None = None) -> pd.DataFrame:
    """Per horizon, on common cells: n, MAE, MASE, relative MAE, win share, DM-HLN, verdict.

    Columns :data:`COMPARE_COLUMNS`. ``win_share_b`` is b's share of series won (series MAE over
    the common cells at that horizon; ties count half). ``better`` names the model that is
    significantly more accurate at level ``alpha`` (two-sided), '' if neither. The overall
    verdict sentence is in ``frame.attrs["verdict"]``. ``cells``: the scored cells of ``sel``
    (from :func:`ledger.scoring.cells.score_cells`, any models and horizons) when the caller already
    holds them, so that one query serves several comparisons; None reads them here.
    """
    _two_models(store, a, b)
    cells = _cells_for(store, dataclasses.replace(sel, models=(a, b), horizons=tuple(horizons)), cells)
    pairs = paired(cells, a, b)
    hs = sorted({int(h) for h in horizons} or set(pairs["horizon"].astype(int)))
    rows = [_compare_row(pairs[pairs["horizon"] == h], h, a, b, alpha) for h in hs]
    frame = pd.DataFrame(rows, columns=list(COMPARE_COLUMNS))
    frame["better"] = frame["better"].astype(object)
    frame.attrs["verdict"] = _verdict(rows, a, b)
    return frame


def _cells_for(store: Store, sel: Selection, cells: pd.DataFrame | None) -> pd.DataFrame:
    """score_cells(store, sel), or the rows of the given cells (of sel without its model and
    horizon filters) that those filters keep, in the same order."""
    if cells is None:
        return score_cells(store, sel)
    keep = np.ones(len(cells), dtype=bool)
    if sel.models:
        keep &= cells["model"].isin(list(sel.models)).to_numpy()
    if sel.horizons:
        keep &= cells["horizon"].isin([int(h) for h in sel.horizons]).to_numpy()
    return cells if keep.all() else cells[keep]


def _two_models(store: Store, a: str, b: str) -> None:
    check_models(store, [a, b])
    if a == b:
        raise LedgerError(f"compare: both models are {a!r}; name two different models")


def _compare_row(p: pd.DataFrame, h: int, a: str, b: str, alpha: float) -> dict:
    if p.empty:
        return dict(horizon=h, n=0, periods=0, mae_a=math.nan, mae_b=math.nan, mase_a=math.nan,
                    mase_b=math.nan, rel_mae=math.nan, win_share_b=math.nan, dm_statistic=math.nan,
                    p_value=math.nan, better="", verdict="no common cells at this horizon", _outcome="untestable")
    per = _series_mae(p)
    dm = dm_hln(period_differential(p), h=h)
    outcome = _outcome(dm, alpha)
    better = {"a": a, "b": b}.get(outcome, "")
    if outcome in ("a", "b"):
        verdict = f"{better} more accurate (DM-HLN {dm.statistic:.2f}, {pval(dm.p_value)})"
    elif outcome == "none":
        verdict = f"no significant difference (DM-HLN {dm.statistic:.2f}, {pval(dm.p_value)})"
    else:
        verdict = f"not enough data to test: {dm.note}"
    return dict(horizon=h, n=len(p), periods=int(p["period_index"].nunique()),
                mae_a=float(p["e_a"].abs().mean()), mae_b=float(p["e_b"].abs().mean()),
                mase_a=float(p["loss_a"].mean()), mase_b=float(p["loss_b"].mean()),
                rel_mae=relative_mae(per["mae_a"], per["mae_b"], per["n"]).value,
                win_share_b=win_share(per["mae_a"], per["mae_b"]).share,
                dm_statistic=dm.statistic, p_value=dm.p_value, better=better, verdict=verdict,
                _outcome=outcome)


def _verdict(rows: list[dict], a: str, b: str) -> str:
    """'b is more accurate than a at horizons 1–3 (p < 0.01); no significant difference at horizons 4–6'."""
    if not rows or all(r["n"] == 0 for r in rows):
        return f"no common cells: {a} and {b} never forecast the same series and period at the same horizon"
    clauses = []
    for outcome in dict.fromkeys(r["_outcome"] for r in rows):
        part = [r for r in rows if r["_outcome"] == outcome]
        where = horizon_text([r["horizon"] for r in part])
        if outcome in ("a", "b"):
            win, lose = (b, a) if outcome == "b" else (a, b)
            clauses.append(f"{win} is more accurate than {lose} at {where} ({_p_band([r['p_value'] for r in part])})")
        elif outcome == "none":
            clauses.append(f"no significant difference at {where}")
        else:
            clauses.append(f"not enough data to test at {where}")
    return "; ".join(clauses)


# ---------------------------------------------------------------- standings


def standings(store: Store, sel: Selection, *, cells: pd.DataFrame | None = None) -> pd.DataFrame:
    """Per evaluation (target) period, each model's MASE, rank and share of series won.

    Common cells per period: the (series, horizon) cells, with a scale, that every model present
    in that period scored, so a model that starts later joins the standings when it starts.
    ``mase`` = mean |e|/q over those cells; ``rank`` 1 = lowest MASE (ties share the better
    rank); ``series_won`` = share of the period's series where the model had the lowest mean
    scaled error (ties split). Columns :data:`STANDINGS_COLUMNS`, ordered by period then rank.
    ``cells``: as in :func:`compare`.
    """
    check_models(store, sel.models)
    cells = _cells_for(store, sel, cells)
    cells = cells[cells["q"].notna() & (cells["q"] > 0)]
    if cells.empty:
        return pd.DataFrame(columns=list(STANDINGS_COLUMNS))
    common = _common_per_period(cells.assign(loss=cells["e"].abs() / cells["q"]))
    table = common.groupby(["period_index", "model"], as_index=False).agg(
        mase=("loss", "mean"), n=("loss", "size"), frequency=("frequency", "first"))
    table = table.merge(_series_won(common), on=["period_index", "model"], how="left")
    table["series_won"] = table["series_won"].fillna(0.0)
    table["rank"] = table.groupby("period_index")["mase"].rank(method="min").astype("int64")
    sizes = common.groupby("period_index").agg(n_series=("series", "nunique"), n_models=("model", "nunique"))
    table = table.merge(sizes, on="period_index").sort_values(["period_index", "rank", "model"], kind="stable")
    table["period"] = [label(i, f) for i, f in zip(table["period_index"], table["frequency"])]
    return table[list(STANDINGS_COLUMNS)].reset_index(drop=True)


def _common_per_period(cells: pd.DataFrame) -> pd.DataFrame:
    present = cells.groupby("period_index")["model"].transform("nunique")
    per_cell = cells.groupby(["period_index", "series", "horizon"])["model"].transform("nunique")
    return cells[per_cell == present]


def _series_won(common: pd.DataFrame) -> pd.DataFrame:
    per = common.groupby(["period_index", "series", "model"], as_index=False)["loss"].mean()
    best = per.groupby(["period_index", "series"])["loss"].transform("min")
    winners = per[per["loss"] == best]
    share = 1.0 / winners.groupby(["period_index", "series"])["model"].transform("size")
    n_series = per.groupby("period_index")["series"].transform("nunique").loc[winners.index]
    won = (share / n_series).groupby([winners["period_index"], winners["model"]]).sum()
    return won.rename("series_won").reset_index()


# ---------------------------------------------------------------- advise


def advise(store: Store, sel: Selection, incumbent: str | None = None, *,
           challengers: Sequence[str] = (), window: int = 12, horizons: Sequence[int] = (),
           alpha: float = 0.05, cells: pd.DataFrame | None = None) -> pd.DataFrame:
    """For each challenger: replace the incumbent or not, and why (columns :data:`ADVICE_COLUMNS`).

    A replacement is recommended only when, on common cells, (1) the challenger is better over
    the recent window (the last ``window`` common evaluation periods): relative MAE below 1 and
    lower MASE; (2) the DM-HLN test over all common periods is significant at ``alpha`` in the
    challenger's favour at every horizon that matters (``horizons``; default all horizons they
    share); (3) it has the lower MAE on a majority of series over the recent window. The test
    also runs over the recent window alone, and the advice states both: the rule uses all
    common periods because a 12-period test has little power (it would rarely confirm a real
    difference), while the recent window already decides which model is better now. Otherwise
    the advice says why not: not enough data (fewer common periods than the window, or a horizon
    the test cannot judge), mixed by horizon, not better, not significant, or mixed by series.
    ``incumbent`` None uses the ledger setting "incumbent" (``Ledger.set_incumbent``).
    ``cells``: as in :func:`compare`.
    """
    incumbent = incumbent or store.get_setting(INCUMBENT_KEY)
    if not incumbent:
        raise LedgerError("advise: no incumbent model; pass --incumbent MODEL (add --save to keep it "
                          "in the ledger) or call Ledger.set_incumbent(MODEL)")
    check_models(store, [incumbent, *challengers])
    if window < 2:
        raise LedgerError(f"advise: window = {window} must be at least 2 evaluation periods")
    cells = _cells_for(store, dataclasses.replace(sel, models=(), horizons=tuple(horizons)), cells)
    others = list(challengers) or [m for m in known_models(store) if m != incumbent and (cells["model"] == m).any()]
    rows = [_advice(paired(cells, incumbent, c), incumbent, c, window, tuple(horizons), alpha)
            for c in others if c != incumbent]
    return pd.DataFrame(rows, columns=list(ADVICE_COLUMNS))


def _advice(pairs: pd.DataFrame, inc: str, ch: str, window: int, horizons: tuple, alpha: float) -> dict:
    row = dict(incumbent=inc, challenger=ch, recommend=False, periods=0, rel_mae=math.nan,
               mase_incumbent=math.nan, mase_challenger=math.nan, series_won=math.nan,
               horizons_better="", horizons_worse="", horizons_unclear="")
    if pairs.empty:
        return row | dict(reason="not enough data", advice=f"keep {inc}: {ch} has no common cells with it")
    periods = np.sort(pairs["period_index"].unique())
    recent = pairs[pairs["period_index"].isin(periods[-window:])]
    per = _series_mae(recent)
    ws = win_share(per["mae_a"], per["mae_b"])
    hs = sorted(set(horizons) or set(pairs["horizon"].astype(int)))
    tests = {h: dm_hln(period_differential(pairs[pairs["horizon"] == h]), h=h) for h in hs}
    recent_tests = {h: dm_hln(period_differential(recent[recent["horizon"] == h]), h=h) for h in hs}
    outcomes = {h: _outcome(t, alpha) for h, t in tests.items()}
    row |= dict(periods=int(recent["period_index"].nunique()),
                rel_mae=relative_mae(per["mae_a"], per["mae_b"], per["n"]).value,
                mase_incumbent=float(recent["loss_a"].mean()), mase_challenger=float(recent["loss_b"].mean()),
                series_won=ws.share, **_horizon_lists(outcomes))
    reason, text = _decide(row, outcomes, tests, ws, len(periods), window, inc, ch)
    if reason != "not enough data" and _any_tested(tests):
        text += _test_windows(tests, recent_tests, len(periods), row["periods"])
    return row | dict(recommend=reason == "recommended", reason=reason, advice=text)


def _any_tested(tests: dict) -> bool:
    """True when at least one horizon's test has a p-value."""
    return any(math.isfinite(t.p_value) for t in tests.values())


def _test_windows(tests: dict, recent: dict, n_all: int, n_recent: int) -> str:
    """'; DM-HLN over all 46 common periods: 1: p 0.3, …; over the last 12: 1: p 0.5, …; the rule uses …'."""
    def listed(results: dict) -> str:
        return ", ".join(f"{h}: {pval(t.p_value)}" for h, t in results.items())

    return (f"; DM-HLN over all {n_all:,} common periods: {listed(tests)}; over the last {n_recent:,}: "
            f"{listed(recent)}; the rule tests all common periods, because {n_recent:,} periods give the test "
            "little power, and uses the recent window to judge which model is better now")


def _horizon_lists(outcomes: dict[int, str]) -> dict:
    pick = lambda *keys: ",".join(str(h) for h, o in outcomes.items() if o in keys)
    return dict(horizons_better=pick("b"), horizons_worse=pick("a"), horizons_unclear=pick("none", "untestable"))


def _decide(row, outcomes, tests, ws, n_periods, window, inc, ch) -> tuple[str, str]:
    better = [h for h, o in outcomes.items() if o == "b"]
    worse = [h for h, o in outcomes.items() if o == "a"]
    unclear = [h for h, o in outcomes.items() if o == "none"]
    untestable = [h for h, o in outcomes.items() if o == "untestable"]
    recent = f"the last {row['periods']} evaluation periods"
    figures = f"relative MAE {short_num(row['rel_mae'])}, MASE {short_num(row['mase_challenger'])} vs {short_num(row['mase_incumbent'])}"
    keep = f"keep {inc}"
    if n_periods < window:
        return "not enough data", f"{keep}: only {n_periods:,} common evaluation periods with {ch}; the recent window needs {window:,}"
    if better and worse:
        return "mixed by horizon", (f"{keep}: {ch} is significantly more accurate at {horizon_text(better)} "
                                    f"but less accurate at {horizon_text(worse)}")
    if not (row["rel_mae"] < 1 and row["mase_challenger"] < row["mase_incumbent"]):
        return "not better", f"{keep}: {ch} is not better over {recent} ({figures})"
    if untestable:
        return "not enough data", f"{keep}: not enough data to test {ch} at {horizon_text(untestable)}"
    if unclear or worse:
        return "not significant", (f"{keep}: {ch} is better over {recent} ({figures}) but not significantly "
                                   f"more accurate at {horizon_text(unclear + worse)} over all {n_periods:,} "
                                   "common periods")
    won = ws.wins + 0.5 * ws.ties
    if not ws.share > 0.5:
        return "mixed by series", (f"{keep}: {ch} is significantly more accurate overall but better on only "
                                   f"{won:g} of {ws.n:,} series over {recent}")
    return "recommended", (f"replace {inc} with {ch}: better over {recent} ({figures}), significantly more "
                           f"accurate at {horizon_text(better)} over all {n_periods:,} common periods "
                           f"(DM-HLN, {_p_band([tests[h].p_value for h in better])}), "
                           f"better on {won:g} of {ws.n:,} series")
