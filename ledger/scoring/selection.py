"""Checking a selection against the ledger: a name nobody recorded is a mistake, not an empty result.

Every command that filters (``--model``, ``--series``, ``--horizon``, ``--where``) checks its
filters here first. An unknown model, series, attribute, attribute value, or a horizon that no
run has, raises :class:`ledger.errors.UnknownName` naming what is known and, when one is close,
the nearest names ("did you mean"); ``difflib``'s ratio with a cutoff of 0.6 — its default
(common practice, no source) — compared case-insensitively. A selection of known names that
holds no scored cells is valid: the caller gets an empty result and says so.
"""

from __future__ import annotations

import difflib
from collections.abc import Iterable, Sequence

from ..errors import UnknownName
from ..intake.csvread import list_names
from ..store import Store
from .attributes import attributes_sql, check_attribute
from .cells import Selection

__all__ = ["check_selection", "selected_series", "unknown_message", "close_names"]


def close_names(name: str, known: Iterable[str], n: int = 3) -> list[str]:
    """The known names nearest to ``name`` (case-insensitive difflib ratio >= 0.6), best first."""
    known = list(known)
    lowered: dict[str, str] = {}
    for k in known:
        lowered.setdefault(str(k).lower(), str(k))
    hits = difflib.get_close_matches(str(name).lower(), list(lowered), n=n, cutoff=0.6)
    return [lowered[h] for h in hits]


def unknown_message(what: str, plural: str, unknown: Sequence[str], known: Sequence[str]) -> str:
    """"unknown model 'x'; did you mean 'a'? known models: a, b" (one line, lists shortened)."""
    listed = list_names(known, 20) if known else "none recorded yet"
    near = [_shown(c) for c in dict.fromkeys(c for u in unknown for c in close_names(u, known))]
    guess = ""
    if near:
        guess = f"did you mean {near[0] if len(near) == 1 else ', '.join(near[:-1]) + ' or ' + near[-1]}? "
    return f"unknown {what} {', '.join(map(_shown, unknown))}; {guess}known {plural}: {listed}"


def _shown(name: str) -> str:
    """A name quoted for a message; the empty name as (empty), never as nothing."""
    return repr(name) if name else "(empty)"


def check_selection(store: Store, sel: Selection) -> Selection:
    """``sel`` if every name in it is known to the ledger, else UnknownName (see module docstring)."""
    con = store.con
    _check(sel.models, "model", "models", lambda: _column(con, "SELECT DISTINCT model FROM runs ORDER BY 1"))
    _check(sel.series, "series", "series", lambda: _column(con, "SELECT series FROM series ORDER BY 1"))
    if sel.horizons:
        known = [int(h) for h in _column(con, "SELECT DISTINCT horizon FROM forecasts ORDER BY 1")]
        missing = [int(h) for h in sel.horizons if int(h) not in known]
        if missing:
            span = f"{known[0]}–{known[-1]}" if known else "none (record a run first)"
            raise UnknownName(f"--horizon {', '.join(map(str, missing))}: no run has "
                              f"{'this horizon' if len(missing) == 1 else 'these horizons'}; "
                              f"horizons in the ledger: {span}")
    for name, value in sel.where:
        check_attribute(store, sel.as_of, name, option="--where")
        values = _column(con, f"SELECT DISTINCT value FROM ({attributes_sql()}) WHERE name = $name ORDER BY 1",
                         {"as_of": sel.as_of, "name": name})
        if value not in values:
            raise UnknownName(f"--where {name}={value}: " + unknown_message(f"{name} value", f"{name} values",
                                                                              [value], values))
    return sel


def _check(names: Sequence[str], what: str, plural: str, known_names) -> None:
    if not names:
        return
    known = known_names()
    unknown = [n for n in dict.fromkeys(names) if n not in set(known)]
    if unknown:
        raise UnknownName(unknown_message(what, plural, unknown, known))


def _column(con, sql: str, params: dict | None = None) -> list:
    return [r[0] for r in con.execute(sql, params or {}).fetchall()]


def selected_series(store: Store, sel: Selection) -> set[str]:
    """The series that ``sel``'s series and attribute filters admit (every series when it has none)."""
    sql = "SELECT series FROM series WHERE TRUE"
    params: dict = {"as_of": sel.as_of} if sel.where else {}
    if sel.series:
        sql += " AND list_contains($names, series)"
        params["names"] = list(sel.series)
    for j, (name, value) in enumerate(sel.where):
        params.update({f"wn{j}": name, f"wv{j}": value})
        sql += f" AND series IN (SELECT series FROM ({attributes_sql()}) WHERE name = $wn{j} AND value = $wv{j})"
    return set(_column(store.con, sql, params))
