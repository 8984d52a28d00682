"""The series identity rule: keys are trimmed and NFC-normalised; control, bidirectional and
zero-width characters are refused with row and column; case is significant but twins are named;
--model and --origin are read by the same rule as the columns."""

from __future__ import annotations

import unicodedata

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from ledger import Ledger
from ledger.errors import InputError, LedgerError
from ledger.intake.keys import REFUSED_RANGES

SPECIAL = st.sampled_from(["\x00", "\x1b", "\t", "\n", "\x85", "\u202e", "\u2066", "\u200b", "\u200d", "\ufeff",
                           "\u0301", "e\u0301", "\u00e9", " ", "\u00a0", "N", "n", "[/]"])
NAMES = st.lists(st.one_of(st.characters(codec="utf-8"), SPECIAL), min_size=1, max_size=8).map("".join)


def _refused(text: str) -> bool:
    return any(a <= ord(ch) <= b for ch in text for a, b, _ in REFUSED_RANGES)


def _canonical(name: str) -> str:
    # Python's str.strip and Arrow's utf8_trim_whitespace agree on Unicode white space
    return unicodedata.normalize("NFC", name.strip())


@settings(suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(names=st.lists(NAMES, min_size=1, max_size=4))
def test_any_key_is_refused_or_stored_canonically(tmp_path_factory, names):
    path = tmp_path_factory.mktemp("k") / "l.duckdb"
    keys = [_canonical(n) for n in names]
    frame = pd.DataFrame({"series": names, "period": [f"2026-{i + 1:02d}" for i in range(len(names))],
                          "actual": range(len(names))})
    with Ledger.open(path) as book:
        # checked in this order over the column: refused characters, then empty, then too long
        bad = [i for i, k in enumerate(keys) if _refused(k)] or [i for i, k in enumerate(keys) if not k] or \
            [i for i, k in enumerate(keys) if len(k) > 200]
        if bad:
            with pytest.raises(InputError, match=f" row {bad[0] + 1} column series: "):
                book.record_actuals(frame, name="f.csv")
            assert book.store.con.execute("SELECT count(*) FROM actuals").fetchall() == [(0,)]
            return
        book.record_actuals(frame, name="f.csv")
        stored = [r[0] for r in book.store.con.execute("SELECT series FROM actuals ORDER BY period").fetchall()]
    assert stored == keys                     # NFC and trimmed: spellings of one key are one series


def test_nfd_and_nfc_are_one_series_and_case_two(tmp_path):
    with Ledger.open(tmp_path / "l.duckdb") as book:
        book.record_actuals(pd.DataFrame({"series": ["cafe\u0301"], "period": ["2026-01"], "actual": [1.0]}))
        second = book.record_actuals(pd.DataFrame({"series": ["caf\u00e9", "Caf\u00e9"], "period": ["2026-01"] * 2,
                                                   "actual": [2.0, 3.0]}), name="f.csv")
        assert (second.new, second.revised) == (1, 1)
        assert second.warnings == ["f.csv: series names that differ only by case: 'Café' / 'café'; "
                                   "they are different series (case is significant)"]


@pytest.mark.parametrize("model,message", [
    ("m\x1b[2J", "--model 'm\\x1b[2J' holds a control character (U+001B)"),
    ("m\nrun forged recorded", "--model 'm\\nrun forged recorded' holds a control character (U+000A)"),
    ("m\u202e", "--model 'm\\u202e' holds a bidirectional embedding or override (U+202E RIGHT-TO-LEFT OVERRIDE)"),
    ("   ", "--model is empty; give a name"),
])
def test_model_option_is_read_like_the_column(tmp_path, model, message):
    frame = pd.DataFrame({"series": ["a"], "period": ["2026-02"], "forecast": [1.0]})
    with Ledger.open(tmp_path / "l.duckdb") as book:
        with pytest.raises(LedgerError) as info:
            book.snapshot(frame, model=model, origin="2026-01")
        assert str(info.value).startswith(message)
        book.snapshot(frame, model=" cafe\u0301 ", origin=" 2026-01 ")
        assert book.runs()["model"].tolist() == ["caf\u00e9"]
        again = book.snapshot(frame.assign(model="caf\u00e9"), model="cafe\u0301", origin="2026-01")
        assert [r.status for r in again.runs] == ["unchanged"]
