"""What changed between two stored reviews: findings new, resolved and persisting; models whose
recent MASE moved.

A finding is matched across reviews by its identity (:mod:`ledger.cycle.identity`), never by
its wording. Notes (a check that could not judge) are not problems and are left out. A model's
recent MASE is the mean |e|/q over its scored cells (all horizons) whose target period is among
the last ``periods`` target periods it has scored cells for (default 12, the value-added
window); it "moved" when it changed by more than ``mase_change`` (default 0.1 in MASE units, a
tenth of the in-sample naive error: a threshold of our choosing, common practice has none).
"""

from __future__ import annotations

import dataclasses

from ..lazy import pandas as pd

from ..errors import UnknownName
from ..scoring.cells import Selection, cells_sql
from ..store import Store

__all__ = ["Changes", "DEFAULT_MASE_CHANGE", "recent_mase", "review_list", "changes"]

DEFAULT_MASE_CHANGE = 0.1
_FINDING_COLS = ["key", "kind", "model", "series", "level", "severity", "since", "figure", "evidence"]


@dataclasses.dataclass(frozen=True)
class Changes:
    """``findings``: status (new, resolved, persisting), key, kind, model, series, level,
    severity_then/now, figure_then/now, evidence (the newer wording). ``models``: model,
    mase_then, mase_now, change, n_then, n_now, moved. ``then`` is None for the first review."""

    then: int | None
    now: int
    mase_change: float
    findings: pd.DataFrame
    models: pd.DataFrame

    def count(self, status: str) -> int:
        return int((self.findings["status"] == status).sum())


def recent_mase(store: Store, sel: Selection, periods: int = 12) -> pd.DataFrame:
    """Per model: MASE over its last ``periods`` scored target periods; columns model, mase, n, periods."""
    sql, params = cells_sql(sel)
    params["periods"] = int(periods)
    return store.con.execute(f"""
        SELECT model, avg(abs(e) / q) AS mase, count(q) AS n, $periods AS periods FROM (
            SELECT c.*, dense_rank() OVER (PARTITION BY model, frequency ORDER BY period_index DESC) AS back
            FROM ({sql}) c) t
        WHERE back <= $periods
        GROUP BY model ORDER BY model""", params).df()


def review_list(store: Store) -> pd.DataFrame:
    """Every stored review: review, as_of, state_hash, inbox, files, runs_new, actuals_new, findings."""
    return store.con.execute("""
        SELECT r.review_id AS review, r.as_of, r.state_hash, r.inbox, r.files, r.runs_new, r.actuals_new,
               (SELECT count(*) FROM review_findings f WHERE f.review_id = r.review_id AND f.severity <> 'note')
               AS findings
        FROM reviews r ORDER BY r.review_id""").df()


def _findings_of(store: Store, review: int | None) -> pd.DataFrame:
    if review is None:
        return pd.DataFrame(columns=_FINDING_COLS)
    return store.con.execute(
        f"SELECT {', '.join('finding_key AS key' if c == 'key' else c for c in _FINDING_COLS)} "
        "FROM review_findings WHERE review_id = ? AND severity <> 'note' ORDER BY kind, model, series, key",
        [review]).df()


def _models_of(store: Store, review: int | None) -> pd.DataFrame:
    if review is None:
        return pd.DataFrame(columns=["model", "mase", "n"])
    return store.con.execute("SELECT model, mase, n FROM review_models WHERE review_id = ? ORDER BY model",
                             [review]).df()


def _pick(store: Store, since_review: int | None, as_of) -> tuple[int | None, int]:
    # Without an as-of every stored review counts, whatever the wall clock says: a review's as-of
    # is the ledger's clock (strictly after every recorded time), which a clock set back, or
    # records made with a clock ahead, can put after "now"; the newest review must not vanish then.
    if as_of is None:
        rows = store.con.execute("SELECT review_id FROM reviews ORDER BY review_id").fetchall()
    else:
        rows = store.con.execute("SELECT review_id FROM reviews WHERE as_of <= $as_of ORDER BY review_id",
                                 {"as_of": as_of}).fetchall()
    ids = [r[0] for r in rows]
    if not ids:
        raise UnknownName("no review stored yet; run backsight review INBOX --out REPORT first")
    now = ids[-1]
    if since_review is None:
        return (ids[-2] if len(ids) > 1 else None), now
    if since_review not in ids:
        raise UnknownName(f"--since-review {since_review}: no such review; stored reviews: "
                          f"{', '.join(map(str, ids[-20:]))}")
    return since_review, now


def _diff_findings(old: pd.DataFrame, new: pd.DataFrame) -> pd.DataFrame:
    both = old.merge(new, on="key", how="outer", suffixes=("_then", "_now"), indicator=True)
    status = both["_merge"].map({"left_only": "resolved", "right_only": "new", "both": "persisting"})
    out = pd.DataFrame({"status": status.astype(object), "key": both["key"]})
    for col in ("kind", "model", "series", "level"):
        out[col] = both[f"{col}_now"].where(both["_merge"] != "left_only", both[f"{col}_then"])
    for col in ("severity", "figure"):
        out[f"{col}_then"], out[f"{col}_now"] = both[f"{col}_then"], both[f"{col}_now"]
    out["evidence"] = both["evidence_now"].where(both["_merge"] != "left_only", both["evidence_then"])
    order = out["status"].map({"new": 0, "persisting": 1, "resolved": 2})
    out = out.assign(_o=order).sort_values(["_o", "kind", "model", "series", "key"], kind="stable")
    return out.drop(columns="_o").reset_index(drop=True)


def _diff_models(old: pd.DataFrame, new: pd.DataFrame, threshold: float) -> pd.DataFrame:
    both = old.merge(new, on="model", how="outer", suffixes=("_then", "_now"))
    both = both.rename(columns={"mase_then": "mase_then", "mase_now": "mase_now"})
    change = both["mase_now"].astype("float64") - both["mase_then"].astype("float64")
    out = both[["model", "mase_then", "mase_now"]].assign(change=change)
    out["n_then"] = both["n_then"].fillna(0).astype("int64")
    out["n_now"] = both["n_now"].fillna(0).astype("int64")
    out["moved"] = change.abs() > threshold
    return out.sort_values("model", kind="stable").reset_index(drop=True)


def changes(store: Store, *, since_review: int | None = None,
            mase_change: float = DEFAULT_MASE_CHANGE, as_of=None) -> Changes:
    """The latest review stored at or before ``as_of`` (default: the latest stored) against review
    ``since_review`` (default: the one before it)."""
    if not mase_change > 0:
        raise UnknownName(f"--mase-change {mase_change} must be above 0")
    then, now = _pick(store, since_review, as_of)
    found = _diff_findings(_findings_of(store, then), _findings_of(store, now))
    models = _diff_models(_models_of(store, then), _models_of(store, now), mase_change)
    return Changes(then, now, mase_change, found, models)
