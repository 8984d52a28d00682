"""Tests for ledger.stats.demand: demand classes (ADI, CV^2) and gaps."""

import math

import numpy as np
import pytest

from ledger.errors import InputError
from ledger.stats.demand import demand_interval_stats, gaps


# ---------------------------------------------------------------- demand classes


@pytest.mark.parametrize(
    "y, adi, cls",
    [
        ([10, 11, 9, 10, 10, 11], 1.0, "smooth"),
        ([0, 0, 5, 0, 0, 5, 0, 0, 5], 3.0, "intermittent"),
        ([1, 10, 1, 10, 1, 10], 1.0, "erratic"),
        ([0, 0, 1, 0, 0, 9, 0, 0, 1], 3.0, "lumpy"),
        ([0, 0, 3], 3.0, "too few demands"),
    ],
)
def test_demand_classes(y, adi, cls):
    # Cut-offs 1.32 and 0.49: Syntetos, Boylan & Croston (2005), "On the categorization of demand
    # patterns", JORS 56.
    got = demand_interval_stats(y)
    assert (got.adi, got.classification) == (pytest.approx(adi), cls)


def test_demand_stats_hand_worked_and_edges():
    got = demand_interval_stats([0, 0, 5, 0, 3, np.nan])
    assert (got.adi, got.n, got.nonzero) == (2.5, 5, 2)  # intervals 3, 2; NaN dropped
    assert got.cv2 == pytest.approx((np.std([5, 3], ddof=1) / 4) ** 2)
    empty = demand_interval_stats([])
    assert math.isnan(empty.adi) and empty.classification == "too few demands"
    assert math.isnan(demand_interval_stats([0, 0, 0]).adi)


# ---------------------------------------------------------------- gaps


def test_gaps():
    assert gaps([1, 2, 5, 6, 9]) == [(3, 2), (7, 2)]
    assert gaps([9, 1, 2, 2, 6, 5]) == [(3, 2), (7, 2)]  # order and duplicates do not matter
    assert gaps([]) == [] and gaps([4]) == [] and gaps(range(10)) == []
    assert gaps([-2, 1]) == [(-1, 2)]
    with pytest.raises(InputError, match="integer period ordinals"):
        gaps([1.5, 2])
