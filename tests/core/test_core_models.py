"""Lead-time demand models and demand statistics, checked against tables, scipy and simulation."""

from __future__ import annotations

import statistics
import warnings

import numpy as np
import pytest
from scipy import integrate, stats

from xlpolicy.core.demand import history_statistics, lead_time_demand
from xlpolicy.core.models import (
    Z_LIMIT,
    NormalLeadTimeDemand,
    inverse_normal_loss,
    normal_loss,
)


def std_model(k: int = 1) -> NormalLeadTimeDemand:
    return NormalLeadTimeDemand(np.zeros(k), np.ones(k))


# ---------------------------------------------------------------------------------------
# Quantiles and cdf
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("p", "z_table"),
    [
        (0.95, 1.645),  # printed normal table (common printed table value)
        (0.90, 1.282),  # printed normal table (common printed table value)
        (0.99, 2.326),  # printed normal table (common printed table value)
        (0.975, 1.960),  # printed normal table (common printed table value)
    ],
)
def test_standard_quantile_matches_printed_table_and_scipy(p: float, z_table: float) -> None:
    z = std_model().quantile(p)[0]
    assert z == pytest.approx(z_table, abs=5e-4)  # printed tables give 3 decimals
    assert z == pytest.approx(stats.norm.ppf(p), rel=1e-12)  # scipy.stats.norm.ppf


def test_scaled_quantile_cdf_sf_match_scipy() -> None:
    mean = np.array([0.0, 12.5, 100.0, 5000.0, 3.0])
    sd = np.array([1.0, 4.0, 25.0, 707.1, 0.2])
    p = np.array([0.5, 0.8, 0.95, 0.999, 0.01])
    m = NormalLeadTimeDemand(mean, sd)
    # scipy.stats.norm with loc/scale is the reference for every value here
    np.testing.assert_allclose(m.quantile(p), stats.norm.ppf(p, mean, sd), rtol=1e-12, atol=1e-12)
    r = mean + sd * np.array([-2.0, 0.3, 1.7, 3.5, 6.0])
    np.testing.assert_allclose(m.cdf(r), stats.norm.cdf(r, mean, sd), rtol=1e-12)
    np.testing.assert_allclose(m.sf(r), stats.norm.sf(r, mean, sd), rtol=1e-12)
    tail = np.array([0.5, 0.04, 1e-6, 1e-12, 0.9])
    np.testing.assert_allclose(m.upper_quantile(tail), stats.norm.isf(tail, mean, sd), rtol=1e-12)


def test_quantile_outside_unit_interval_is_nan() -> None:
    out = std_model(3).quantile(np.array([-0.1, 1.5, np.nan]))
    assert np.isnan(out).all()


# ---------------------------------------------------------------------------------------
# Standard normal loss function
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("z", "g_table"),
    [
        (0.0, 0.3989),  # Silver, Pyke & Peterson (1998) appendix table, from memory
        (1.0, 0.0833),  # Silver, Pyke & Peterson (1998) appendix table, from memory
        (2.0, 0.0085),  # Silver, Pyke & Peterson (1998) appendix table, from memory
    ],
)
def test_normal_loss_matches_table(z: float, g_table: float) -> None:
    assert normal_loss(z) == pytest.approx(g_table, abs=5e-5)
    # independent: scipy's pdf and sf in the textbook formula G = phi - z (1 - Phi)
    assert normal_loss(z) == pytest.approx(stats.norm.pdf(z) - z * stats.norm.sf(z), rel=1e-12)


def test_normal_loss_matches_scipy_formula_on_a_grid() -> None:
    z = np.linspace(-8.0, 8.0, 641)
    ref = stats.norm.pdf(z) - z * stats.norm.sf(z)  # scipy.stats, textbook formula
    np.testing.assert_allclose(normal_loss(z), ref, rtol=1e-9)


@pytest.mark.parametrize("z", [-3.0, -0.7, 0.0, 0.4, 1.5, 3.2])
def test_normal_loss_is_the_integral_of_the_excess(z: float) -> None:
    # definition: G(z) = integral from z to infinity of (x - z) phi(x) dx (scipy.integrate.quad)
    ref, err = integrate.quad(lambda x: (x - z) * stats.norm.pdf(x), z, np.inf)
    assert normal_loss(z) == pytest.approx(ref, rel=1e-8, abs=10 * err)


@pytest.mark.parametrize("z", [6.0, 10.0, 20.0, 30.0, 37.0])
def test_normal_loss_upper_tail_keeps_relative_precision(z: float) -> None:
    # 60-digit reference with mpmath: G(z) = phi(z) - z (1 - Phi(z)), no cancellation trouble
    mpmath = pytest.importorskip("mpmath")
    mpmath.mp.dps = 60
    zm = mpmath.mpf(z)
    ref = mpmath.npdf(zm) - zm * (1 - mpmath.ncdf(zm))
    assert float(normal_loss(z)) == pytest.approx(float(ref), rel=1e-10)


def test_normal_loss_symmetry_and_limits() -> None:
    z = np.linspace(0.0, 30.0, 61)
    # G(-z) = G(z) + z (follows from the definition; any OR text on the loss function)
    np.testing.assert_allclose(normal_loss(-z), normal_loss(z) + z, rtol=1e-13)
    assert normal_loss(np.inf) == 0.0
    assert normal_loss(-np.inf) == np.inf
    assert np.isnan(normal_loss(np.nan))


def test_inverse_normal_loss_round_trips() -> None:
    g = np.concatenate([np.logspace(-250, 1.5, 400), [39.0, 40.0, 55.5, 1e6]])
    z = inverse_normal_loss(g)
    np.testing.assert_allclose(normal_loss(z), g, rtol=1e-9)
    z_grid = np.linspace(-Z_LIMIT, 30.0, 500)
    np.testing.assert_allclose(
        inverse_normal_loss(normal_loss(z_grid)), z_grid, rtol=1e-9, atol=1e-12
    )


def test_inverse_normal_loss_matches_scipy_root_finder() -> None:
    from scipy.optimize import brentq

    for g in (0.3989, 0.08, 0.0085, 1e-5, 2.5):
        # scipy.optimize.brentq on scipy's textbook-form G is the independent reference
        ref = brentq(
            lambda x, g=g: stats.norm.pdf(x) - x * stats.norm.sf(x) - g, -20, 8, xtol=1e-14
        )
        assert inverse_normal_loss(g) == pytest.approx(ref, abs=1e-9)


def test_inverse_normal_loss_edges() -> None:
    out = inverse_normal_loss(np.array([0.0, -1.0, np.nan]))
    assert out[0] == np.inf
    assert np.isnan(out[1]) and np.isnan(out[2])


# ---------------------------------------------------------------------------------------
# Expected shortage
# ---------------------------------------------------------------------------------------


def test_expected_shortage_matches_monte_carlo() -> None:
    rng = np.random.default_rng(20240611)
    mean, sd = 100.0, 25.0
    x = rng.normal(mean, sd, size=400_000)
    m = NormalLeadTimeDemand(np.array([mean]), np.array([sd]))
    for r in (60.0, 100.0, 130.0, 160.0):
        short = np.maximum(x - r, 0.0)
        est = short.mean()
        se = short.std(ddof=1) / np.sqrt(x.size)
        # simulation: the exact value lies within 5 standard errors of the sample mean
        assert abs(m.expected_shortage(r)[0] - est) < 5 * se + 1e-12


def test_expected_shortage_chopra_meindl_example() -> None:
    # Chopra & Meindl, safety inventory chapter (from memory): lead-time demand mean 5000,
    # sd 707 (weekly 2500 +- 500 over 2 weeks), reorder point 6000 -> expected shortage per
    # cycle about 25.13 units; with Q = 10000, fill rate about 0.9975.
    m = NormalLeadTimeDemand(np.array([5000.0]), np.array([500.0 * np.sqrt(2.0)]))
    esc = m.expected_shortage(6000.0)[0]
    assert esc == pytest.approx(25.13, abs=0.02)
    assert 1 - esc / 10000 == pytest.approx(0.9975, abs=1e-4)
    # independent check: scipy.integrate.quad of (x - R) f(x) over x > R
    ref, _ = integrate.quad(
        lambda x: (x - 6000.0) * stats.norm.pdf(x, 5000.0, m.sd[0]), 6000.0, np.inf
    )
    assert esc == pytest.approx(ref, rel=1e-8)


def test_min_r_for_shortage_is_the_smallest_such_r() -> None:
    mean = np.array([100.0, 40.0, 5000.0, 3.0, 250.0])
    sd = np.array([25.0, 20.0, 707.0, 2.0, 10.0])
    target = np.array([2.0, 0.01, 25.13, 5.0, 1e-9])
    m = NormalLeadTimeDemand(mean, sd)
    r = m.min_r_for_shortage(target)
    np.testing.assert_allclose(m.expected_shortage(r), target, rtol=1e-8)
    # expected shortage falls as r rises, so any smaller r misses the target
    assert (m.expected_shortage(r - 1e-3 * sd) > target).all()
    assert m.min_r_for_shortage(np.array([0.0] * 5))[0] == np.inf
    assert np.isnan(m.min_r_for_shortage(np.array([-1.0] * 5))).all()


def test_very_large_shortage_target_gives_mean_minus_target() -> None:
    # far below the mean every unit of demand is short: E[(X - r)^+] = mean - r (exact limit)
    m = NormalLeadTimeDemand(np.array([100.0]), np.array([1.0]))
    r = m.min_r_for_shortage(np.array([500.0]))[0]
    assert r == pytest.approx(-400.0, rel=1e-12)


# ---------------------------------------------------------------------------------------
# Deterministic lead-time demand (sd == 0) and bad parameters
# ---------------------------------------------------------------------------------------


def test_zero_sd_is_a_point_mass() -> None:
    m = NormalLeadTimeDemand(np.array([70.0, 70.0, 70.0]), np.zeros(3))
    r = np.array([69.0, 70.0, 71.5])
    np.testing.assert_array_equal(m.cdf(r), [0.0, 1.0, 1.0])
    np.testing.assert_array_equal(m.sf(r), [1.0, 0.0, 0.0])
    np.testing.assert_array_equal(m.quantile(np.array([0.1, 0.5, 0.999])), [70.0] * 3)
    np.testing.assert_array_equal(m.expected_shortage(r), [1.0, 0.0, 0.0])
    np.testing.assert_array_equal(
        m.min_r_for_shortage(np.array([0.0, 5.0, 2.5])), [70.0, 65.0, 67.5]
    )


def test_zero_sd_step_ignores_float_noise() -> None:
    mean = (10.0 / 7.0) * 7.0  # float noise around 10 from d * L
    m = NormalLeadTimeDemand(np.array([mean]), np.array([0.0]))
    assert m.cdf(10.0)[0] == 1.0


def test_nan_and_negative_parameters_give_nan_quietly() -> None:
    m = NormalLeadTimeDemand(np.array([np.nan, 10.0, 10.0]), np.array([1.0, np.nan, -1.0]))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for method in (m.cdf, m.sf, m.expected_shortage):
            assert np.isnan(method(5.0)).all()
        assert np.isnan(m.quantile(0.9)).all()
        assert np.isnan(m.min_r_for_shortage(1.0)).all()


def test_methods_broadcast_over_items() -> None:
    m = NormalLeadTimeDemand(np.array([10.0, 20.0, 30.0]), np.array([1.0, 2.0, 3.0]))
    assert m.quantile(0.9).shape == (3,)
    assert m.expected_shortage(np.array([[10.0], [20.0]])).shape == (2, 3)
    assert m.name == "normal"


# ---------------------------------------------------------------------------------------
# Demand statistics from history
# ---------------------------------------------------------------------------------------


def test_history_statistics_match_stdlib_sample_statistics() -> None:
    rows = [
        [3.0, 0.0, 5.0, 7.0, np.nan, 2.0],
        [np.nan, np.nan, np.nan, np.nan, np.nan, np.nan],
        [4.0, np.nan, np.nan, np.nan, np.nan, np.nan],
        [1e6 + 1, 1e6 + 2, 1e6 + 3, np.nan, 1e6 + 4, 1e6 + 5],
    ]
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # an all-empty row must not warn
        st = history_statistics(np.array(rows))
    # Python's statistics module (sample sd, n - 1) is the reference
    vals0 = [3.0, 0.0, 5.0, 7.0, 2.0]
    assert st.mean[0] == pytest.approx(statistics.mean(vals0))
    assert st.sd[0] == pytest.approx(statistics.stdev(vals0))
    assert (st.periods[0], st.nonzero_periods[0]) == (5, 4)
    assert np.isnan(st.mean[1]) and np.isnan(st.sd[1]) and st.periods[1] == 0
    assert st.mean[2] == 4.0 and np.isnan(st.sd[2]) and st.periods[2] == 1
    vals3 = [1e6 + k for k in range(1, 6)]
    assert st.sd[3] == pytest.approx(statistics.stdev(vals3), rel=1e-9)  # two-pass accuracy


def test_history_statistics_single_row_and_empty() -> None:
    st = history_statistics(np.array([2.0, 4.0]))
    assert st.mean.shape == (1,) and st.sd[0] == pytest.approx(np.sqrt(2.0))
    empty = history_statistics(np.zeros((3, 0)))
    assert np.isnan(empty.mean).all() and (empty.periods == 0).all()


def test_lead_time_demand_constant_lead_time() -> None:
    # sigma_L = sigma_d sqrt(L) for a fixed lead time (common practice; any inventory text)
    mu, sigma = lead_time_demand(
        np.array([2500.0]), np.array([500.0]), np.array([2.0]), np.array([0.0])
    )
    assert mu[0] == 5000.0
    assert sigma[0] == pytest.approx(707.1068, abs=1e-4)  # Chopra & Meindl example, from memory
