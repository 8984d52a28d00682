"""Which model adjusts which: the override relation, recorded in the ledger and versioned.

A judgmental override is a model whose forecasts are another model's, changed by hand (the
demo's ``planner-override`` raises ``incumbent-hw``'s). ``backsight adjusts OVERRIDE=BASE``
records that OVERRIDE adjusts BASE; ``backsight adjusts --withdraw OVERRIDE`` ends it. Like the
series attributes, the relation is versioned: a change appends a row to ``overrides`` (``base``
NULL: withdrawn), and the relation in force at an as-of is the newest row per override recorded
at or before it, so ``--as-of`` reproduces what the ledger said then.

The report's forecast value added and the value findings use the recorded relation when no
``--adjusts`` option is given; an ``--adjusts`` option replaces it for that one call (one way to
name the relation for a call, one place that decides between the two: :func:`overrides_for`).
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from collections.abc import Iterable, Mapping

from .errors import UnknownName
from .scoring.selection import unknown_message
from .store import Store

__all__ = ["OverridesResult", "overrides_in_force", "overrides_for", "parse_overrides", "record_overrides",
           "overrides_sql"]


@dataclasses.dataclass(frozen=True)
class OverridesResult:
    """What one ``adjusts`` call wrote: relations changed (recorded or withdrawn) and unchanged."""

    changed: int
    unchanged: int


def parse_overrides(texts: Iterable[str], option: str = "--adjusts") -> dict[str, str]:
    """{override: base} from "OVERRIDE=BASE" texts (the ``--adjusts`` option and command)."""
    out: dict[str, str] = {}
    for text in texts:
        override, sep, base = (part.strip() for part in str(text).partition("="))
        if not sep or not override or not base or override == base:
            raise UnknownName(f"{option} {text!r}: write OVERRIDE=BASE with two different model names, "
                              "e.g. planner-override=incumbent-hw")
        if out.get(override, base) != base:
            raise UnknownName(f"{option}: {override!r} is given two bases ({out[override]!r} and {base!r}); "
                              "an override adjusts one model")
        out[override] = base
    return out


def overrides_sql() -> str:
    """The relation in force at $as_of: one row (override, base) per override not withdrawn."""
    return """
    SELECT override, base FROM (
        SELECT override, base, row_number() OVER (PARTITION BY override ORDER BY recorded_at DESC) AS rn
        FROM overrides WHERE recorded_at <= $as_of) t
    WHERE rn = 1 AND base IS NOT NULL"""


def overrides_in_force(store: Store, as_of: dt.datetime) -> dict[str, str]:
    """{override: base} recorded in the ledger and in force at ``as_of``."""
    rows = store.con.execute(overrides_sql() + " ORDER BY override", {"as_of": as_of}).fetchall()
    return {str(o): str(b) for o, b in rows}


def overrides_for(store: Store, as_of: dt.datetime, given: Mapping[str, str] | None) -> dict[str, str]:
    """The relation a call uses: ``given`` (from ``--adjusts``) when not None, else the recorded one."""
    return dict(given) if given is not None else overrides_in_force(store, as_of)


def record_overrides(store: Store, pairs: Mapping[str, str | None], *, source: str | None = None) -> OverridesResult:
    """Record ``pairs`` ({override: base}; base None withdraws) in one transaction.

    Both models of a pair must have a run in the ledger (UnknownName, with the nearest names);
    an override may not adjust itself, nor a model that adjusts it (directly or further down),
    because the value each step adds is then undefined. A pair already in force is unchanged.
    """
    known = [r[0] for r in store.con.execute("SELECT DISTINCT model FROM runs ORDER BY 1").fetchall()]
    names = [n for pair in pairs.items() for n in pair if n is not None]
    unknown = [n for n in dict.fromkeys(names) if n not in set(known)]
    if unknown:
        raise UnknownName("adjusts: " + unknown_message("model", "models", unknown, known))
    with store.transaction() as con:
        stamp = store.next_timestamp()
        now = overrides_in_force(store, stamp)
        changed = unchanged = 0
        for override, base in pairs.items():
            if override == base:
                raise UnknownName(f"adjusts: {override!r} cannot adjust itself")
            if now.get(override) == base:
                unchanged += 1
                continue
            if base is not None:
                _refuse_cycle(now | {override: base}, override)
            con.execute("INSERT INTO overrides VALUES (?, ?, ?, ?)", [override, base, stamp, source])
            if base is None:
                now.pop(override, None)
            else:
                now[override] = base
            changed += 1
    return OverridesResult(changed, unchanged)


def _refuse_cycle(relation: Mapping[str, str], start: str) -> None:
    seen, step = [start], relation.get(start)
    while step is not None:
        if step in seen:
            chain = " adjusts ".join(repr(s) for s in [*seen, step])
            raise UnknownName(f"adjusts: {chain}: the steps go round in a circle; withdraw one with "
                              "backsight adjusts --withdraw MODEL first")
        seen.append(step)
        step = relation.get(step)
