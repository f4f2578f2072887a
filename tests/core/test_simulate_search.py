"""The reorder point that reaches a target in the back-test simulation (core.simulate_search).

References: the normal lead-time demand model's reorder point R = d L + z s sqrt(L) with
z the target's standard normal quantile (Silver, Pyke & Peterson, "Inventory Management and
Production Planning and Scheduling", 3rd ed. 1998, ch. 7, from memory), computed with
scipy.stats; and the search's own definition, checked by simulating again.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from xlpolicy.core.simulate import ModelDraws, simulate_policy
from xlpolicy.core.simulate_search import reorder_point_for_target


def _source(n: int) -> ModelDraws:
    # demand 20 a period, sd 6, drawn from the normal model (invented figures)
    return ModelDraws(np.array(["normal"] * n), np.full(n, 20.0), np.full(n, 6.0), 260)


def test_found_point_is_the_smallest_that_reaches_the_target_on_the_same_draws():
    n, L, Q = 3, np.array([2.0, 1.5, 3.0]), np.full(3, 60.0)
    start = np.array([30.0, 20.0, 50.0])  # well below what the targets need
    target = np.array([0.95, 0.90, 0.97])
    kw = dict(replications=20, seed=9, periods_per_year=52.0)
    got = reorder_point_for_target(Q, start, L, np.zeros(n), _source(n), target, 2.0, **kw)
    assert (got > start).all() and (got == np.round(got)).all()

    def service(r: np.ndarray) -> np.ndarray:
        return simulate_policy(Q, r, L, np.zeros(n), _source(n), **kw).cycle_service

    assert (service(got) >= target).all()
    assert (service(got - 1.0) < target).all()


def test_found_point_matches_the_normal_formula_on_normal_demand():
    # Simulating the model itself, the search lands where the formula puts R: the
    # smallest whole R with Phi((R - d L) / (s sqrt L)) >= target, give or take the
    # simulation's error (about a unit here, 200 runs).
    n, L = 4, np.array([1.0, 2.0, 3.0, 4.0])
    target = 0.95
    got = reorder_point_for_target(
        np.full(n, 80.0),
        np.zeros(n),
        L,
        np.zeros(n),
        _source(n),
        np.full(n, target),
        4.0,
        replications=200,
        seed=4,
    )
    want = np.ceil(20.0 * L + stats.norm.ppf(target) * 6.0 * np.sqrt(L))
    assert np.abs(got - want).max() <= 2.0, (got, want)


def test_an_item_already_at_target_needs_nothing_and_an_unusable_one_gets_nan():
    got = reorder_point_for_target(
        [60.0, np.nan],
        [200.0, 10.0],
        [2.0, 2.0],
        [0.0, 0.0],
        _source(2),
        [0.95, 0.95],
        1.0,
        replications=5,
        seed=1,
    )
    assert got[0] == 200.0
    assert math.isnan(got[1])


@pytest.mark.parametrize("fill", [False, True])
def test_search_also_works_for_the_fill_rate(fill):
    got = reorder_point_for_target(
        [60.0],
        [10.0],
        [2.0],
        [0.0],
        _source(1),
        [0.98],
        3.0,
        fill_rate=fill,
        replications=20,
        seed=2,
    )
    res = simulate_policy([60.0], got, [2.0], [0.0], _source(1), replications=20, seed=2)
    key = res.fill_rate if fill else res.cycle_service
    assert key[0] >= 0.98
