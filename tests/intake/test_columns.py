"""Bound and quantile column names: one canonical parse; two names of one level are refused
naming both columns; two levels that print alike are kept apart; the hints name the right column."""

from __future__ import annotations

from decimal import Decimal

import pandas as pd
import pytest
from hypothesis import given, strategies as st

from ledger import Ledger
from ledger.errors import InputError
from ledger.wording import quantile_name


def frame(**columns):
    base = {"series": ["a", "b"], "period": ["2026-02", "2026-02"], "forecast": [10.0, 20.0]}
    return pd.DataFrame(base | {k.replace("__", "."): v for k, v in columns.items()})


def snap(tmp_path, data):
    with Ledger.open(tmp_path / "l.duckdb") as book:
        book.snapshot(data, model="m", origin="2026-01", name="f.csv")
        return book.store.con.execute("SELECT DISTINCT level FROM bounds ORDER BY 1").fetchall(), \
            book.store.con.execute("SELECT DISTINCT tau FROM quantiles ORDER BY 1").fetchall(), book.verify()


REFUSED = [
    ({"q100": [1, 2]}, "f.csv column q100: reads as the 0.100 quantile, which is named q10; name it so "
                       "(quantile levels are in (0, 1))"),
    ({"q10": [1, 2], "q100": [1, 2]}, "f.csv column q100: reads as the 0.100 quantile, which is named q10; "
                                      "name it so (quantile levels are in (0, 1))"),
    ({"q50": [1, 2], "q0__5": [1, 2]}, "f.csv column q0.5: names the same quantile level (0.5) as column q50; "
                                       "keep one of them"),
    ({"lower_80": [1, 2], "upper_80": [11, 21], "lower_80__0": [1, 2], "upper_80__0": [11, 21]},
     "f.csv column lower_80.0: names the same interval level (80) as column lower_80; keep one of them"),
    ({"lower_80": [1, 2], "upper_80": [11, 21], "lower_080": [1, 2], "upper_080": [11, 21]},
     "f.csv column lower_080: names the same interval level (80) as column lower_80; keep one of them"),
    ({"tau_0__9": [1, 2]}, "f.csv column tau_0.9: looks like a quantile; name it q90 (q10 is the 0.10 quantile)"),
    ({"tau_0__09": [1, 2]}, "f.csv column tau_0.09: looks like a quantile; name it q09 (q10 is the 0.10 quantile)"),
    ({"p975": [1, 2]}, "f.csv column p975: looks like a quantile; quantile levels are in (0, 1) (q10 is the 0.10 quantile)"),
    ({"p97__5": [1, 2]}, "f.csv column p97.5: looks like a quantile; name it q975 (q10 is the 0.10 quantile)"),
    ({"q5": [1, 2]}, "f.csv column q5: looks like a quantile; name it q05 (the 0.05 quantile) or q50 "
                     "(the 0.5 quantile) (q10 is the 0.10 quantile)"),
    ({"lower_80__0000001": [1, 2]}, "f.csv column lower_80.0000001: has no matching upper_80.0000001 column"),
]


@pytest.mark.parametrize("columns,message", REFUSED, ids=[m.split(":")[0][13:] for _, m in REFUSED])
def test_aliasing_names_are_refused_naming_both(tmp_path, columns, message):
    with pytest.raises(InputError) as info:
        snap(tmp_path, frame(**columns))
    assert str(info.value) == message


def test_leading_zero_and_trailing_zero_spell_one_level(tmp_path):
    levels, _, problems = snap(tmp_path, frame(lower_080=[1, 2], upper_80__0=[11, 21], q05=[1, 2], q0__50=[3, 4]))
    assert levels == [(80.0,)] and problems == []


@pytest.mark.parametrize("a,b", [("99.12345", "99.12346"), ("80", "80.0000001")])
def test_levels_that_print_alike_are_two_levels(tmp_path, a, b):
    # issue 12 item 6: these crashed the snapshot when staged columns were named by the printed level
    data = frame(**{f"lower_{a}".replace(".", "__"): [1, 2], f"upper_{a}".replace(".", "__"): [11, 21],
                    f"lower_{b}".replace(".", "__"): [1.5, 2.5], f"upper_{b}".replace(".", "__"): [10.5, 20.5],
                    "q0__991234": [5, 6], "q0__9912341": [7, 8]})
    levels, taus, problems = snap(tmp_path, data)
    assert levels == [(float(a),), (float(b),)]
    assert taus == [(0.991234,), (0.9912341,)]
    assert problems == []


def test_quantile_name():
    assert [quantile_name(Decimal(t)) for t in ("0.1", "0.975", "0.05", "0.5", "0.100")] == \
        ["q10", "q975", "q05", "q50", "q10"]


LEVEL_TEXT = st.builds(lambda whole, frac, zeros: f"{'0' * zeros}{whole}" + (f".{frac}" if frac else ""),
                       st.integers(1, 99), st.sampled_from(["", "0", "5", "00", "50", "0000001", "12345"]),
                       st.integers(0, 1))


@given(LEVEL_TEXT, LEVEL_TEXT)
def test_two_level_spellings_either_collide_by_name_or_stay_apart(tmp_path_factory, a, b):
    if a == b:
        return
    tmp = tmp_path_factory.mktemp("lv")
    data = frame(**{f"lower_{a}".replace(".", "__"): [1, 2], f"upper_{a}".replace(".", "__"): [11, 21],
                    f"lower_{b}".replace(".", "__"): [1, 2], f"upper_{b}".replace(".", "__"): [11, 21]})
    if float(Decimal(a)) == float(Decimal(b)):
        with pytest.raises(InputError, match=f"column lower_{b}: names the same interval level .* as column lower_{a}"):
            snap(tmp, data)
    else:
        levels, _, problems = snap(tmp, data)
        assert levels == sorted([(float(Decimal(a)),), (float(Decimal(b)),)]) and problems == []
