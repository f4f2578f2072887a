"""Demand as real histories have it (slow, lumpy, new, seasonal), through the whole planner.

Histories are drawn from known distributions with a seeded generator; the checks are
against the generating family (the model rule should recover it) and against
scipy.stats computations of the policy under the chosen model.
"""

from __future__ import annotations

import datetime as dt
import math

import numpy as np
import pytest
from builders import BASE_HEADERS, item_row, write_workbook
from scipy import stats

import xlpolicy
from xlpolicy.contract import DEMAND_MODELS
from xlpolicy.problems import Severity

WEEKS = 104


def mixed_histories(seed: int = 3) -> dict[str, list[float]]:
    """Steady, slow, lumpy, seasonal, new, spiky, dormant and trending items."""
    rng = np.random.default_rng(seed)
    t = np.arange(WEEKS)
    season = 1 + 0.8 * np.sin(2 * np.pi * t / 52)
    # sale sizes lognormal with sigma 1: CV^2 = e - 1 = 1.7 > 0.49 (lumpy, not intermittent)
    lumpy = np.where(rng.random(WEEKS) < 0.12, np.ceil(rng.lognormal(2.0, 1.0, WEEKS)), 0)
    spiky = rng.poisson(6, WEEKS).astype(float)
    spiky[40] = 200
    dormant = rng.poisson(3, WEEKS).astype(float)
    dormant[-20:] = 0
    return {
        "STEADY": list(rng.poisson(60, WEEKS).astype(float)),
        "SLOW": list(rng.poisson(0.8, WEEKS).astype(float)),
        "LUMPY": list(lumpy.astype(float)),
        "SEASON": list(rng.poisson(25 * season).astype(float)),
        "NEW": [0.0] * 90 + list(rng.poisson(12, 14).astype(float)),
        "SPIKY": list(spiky),
        "DORMANT": list(dormant),
        "RISING": list(rng.poisson(np.where(t < 70, 10, 25)).astype(float)),
    }


@pytest.fixture(scope="module")
def mixed(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("mixed")
    hist = mixed_histories()
    rows = [item_row(code, lead=14) for code in hist]
    path = write_workbook(tmp / "mix.xlsx", rows, history=hist, skip_zero_rows=True)
    report = xlpolicy.analyse(path)
    return report, report.results.set_index("item")


def test_every_item_gets_a_named_model_and_no_negative_reorder_point(mixed):
    _, r = mixed
    assert set(r["model"]) <= set(DEMAND_MODELS)
    assert (r["reorder_point"] >= 0).all()
    assert r["model_reason"].str.len().gt(10).all()
    assert (r["status"] != "skipped").all()


def test_models_fit_the_histories(mixed):
    _, r = mixed
    assert r.at["STEADY", "model"] == "normal"  # 120 units over the lead time
    assert r.at["SLOW", "model"] == "poisson"  # 1.6 units, variance ~ mean
    assert r.at["LUMPY", "model"] == "negative binomial"  # variance far above the mean
    assert r.at["LUMPY", "demand_class"] == "lumpy"  # SBC 2005 cut-offs
    assert r.at["LUMPY", "rate_method"] == "SBA"
    assert r.at["STEADY", "demand_class"] == "smooth"


def test_reorder_point_under_the_chosen_model_matches_scipy(mixed):
    _, r = mixed
    # SLOW is Poisson: R is the smallest whole r with P(X <= r) >= 0.95 (scipy.stats.poisson)
    mu = r.at["SLOW", "lead_time_demand_mean"]
    rop = r.at["SLOW", "reorder_point"]
    assert stats.poisson.cdf(rop, mu) >= 0.95 > stats.poisson.cdf(rop - 1, mu)
    assert r.at["SLOW", "cycle_service"] == pytest.approx(stats.poisson.cdf(rop, mu))
    # LUMPY is negative binomial with matched mean and variance
    mu, sd = r.at["LUMPY", "lead_time_demand_mean"], r.at["LUMPY", "lead_time_demand_sd"]
    n, p = mu * mu / (sd * sd - mu), mu / (sd * sd)
    rop = r.at["LUMPY", "reorder_point"]
    assert stats.nbinom.cdf(rop, n, p) >= 0.95 > stats.nbinom.cdf(rop - 1, n, p)


def test_planner_notes_read_like_a_planners(mixed):
    report, _ = mixed
    by_item: dict[str, set[str]] = {}
    for p in report.problems:
        by_item.setdefault(p.item, set()).add(p.code)
    # the seasonal item is planned with its season: the warning became a note of what was done
    assert "demand-planned-with-forecast" in by_item["SEASON"]
    assert "demand-seasonal" not in by_item["SEASON"]
    assert "history-new-item" in by_item["NEW"] and "history-short" in by_item["NEW"]
    assert "demand-outlier" in by_item["SPIKY"]
    assert "demand-dormant" in by_item["DORMANT"]
    assert "demand-trend" not in by_item["DORMANT"]  # the stop explains the fall: say it once
    assert by_item["RISING"] & {"demand-trend", "demand-planned-with-forecast"}
    quiet = by_item.get("STEADY", set()) | by_item.get("SLOW", set())
    assert not quiet & {
        "demand-seasonal",
        "demand-trend",
        "demand-outlier",
        "demand-dormant",
        "demand-planned-with-forecast",
    }
    spiky = next(p for p in report.problems if p.code == "demand-outlier")
    assert "200 units" in spiky.message and "Cap outliers" in spiky.message


def test_new_item_is_planned_on_its_own_span(mixed):
    _, r = mixed
    assert r.at["NEW", "history_periods"] == 14
    assert (
        r.at["NEW", "history_start"] == (dt.date(2024, 1, 1) + dt.timedelta(weeks=90)).isoformat()
    )
    assert 8 < r.at["NEW", "demand_per_period"] < 16  # ~12 a week, not 14/104 of it


def test_model_forced_per_item_and_for_all(tmp_path):
    hist = mixed_histories()
    headers = BASE_HEADERS + ["Demand model"]
    rows = [item_row(c, lead=14) + ["gamma" if c == "SLOW" else None] for c in hist]
    p = write_workbook(tmp_path / "w.xlsx", rows, headers=headers, history=hist)
    r = xlpolicy.analyse(p).results.set_index("item")
    assert r.at["SLOW", "model"] == "gamma" and r.at["SLOW", "model_reason"] == "set by the user"
    p2 = write_workbook(
        tmp_path / "w2.xlsx",
        [item_row(c, lead=14) for c in hist],
        history=hist,
        settings={"Demand model": "normal"},
    )
    r2 = xlpolicy.analyse(p2).results
    assert set(r2["model"]) == {"normal"}


def test_unknown_model_name_is_reported_and_auto_used(tmp_path):
    hist = mixed_histories()
    headers = BASE_HEADERS + ["Demand model"]
    rows = [item_row(c, lead=14) + ["weibull" if c == "SLOW" else None] for c in hist]
    p = write_workbook(tmp_path / "w.xlsx", rows, headers=headers, history=hist)
    probs = [x for x in xlpolicy.check(p) if x.code == "demand_model-unknown"]
    assert len(probs) == 1 and probs[0].cell == "H3" and probs[0].severity is Severity.WARNING


def test_history_start_column_overrides_first_sale(tmp_path):
    hist = mixed_histories()
    headers = BASE_HEADERS + ["History start"]
    rows = [
        item_row(c, lead=14)
        + [dt.datetime(2024, 1, 1) + dt.timedelta(weeks=80) if c == "RISING" else None]
        for c in hist
    ]
    p = write_workbook(tmp_path / "w.xlsx", rows, headers=headers, history=hist)
    r = xlpolicy.analyse(p).results.set_index("item")
    assert r.at["RISING", "history_periods"] == WEEKS - 80
    recent = np.array(hist["RISING"][80:])
    assert r.at["RISING", "demand_per_period"] == pytest.approx(recent.mean())


def test_cap_outliers_setting_caps_and_still_reports(tmp_path):
    hist = mixed_histories()
    rows = [item_row(c, lead=14) for c in hist]
    plain = xlpolicy.analyse(write_workbook(tmp_path / "a.xlsx", rows, history=hist))
    capped = xlpolicy.analyse(
        write_workbook(tmp_path / "b.xlsx", rows, history=hist, settings={"Cap outliers": "yes"})
    )
    a = plain.results.set_index("item").at["SPIKY", "demand_sd_per_period"]
    b = capped.results.set_index("item").at["SPIKY", "demand_sd_per_period"]
    assert b < 0.7 * a
    note = next(p for p in capped.problems if p.code == "demand-outlier")
    assert "capped" in note.message


def test_slow_mover_policy_meets_its_target_under_the_true_distribution():
    # Simulation against the generating process (not the fitted model): Poisson(0.8)/week,
    # lead time 2 weeks, target 95 % cycle service. Estimate from 104 weeks, then measure
    # P(lead-time demand <= R) under the true Poisson(1.6). Over 200 seeded histories the
    # average achieved service must be within 2 points of the target.
    from xlpolicy.core.history import analyse_history
    from xlpolicy.core.model_choice import choose_model
    from xlpolicy.core.policy import PolicyInputs, compute_policy

    rng = np.random.default_rng(42)
    m = rng.poisson(0.8, (200, WEEKS)).astype(float)
    an = analyse_history(m, 52)
    model, _ = choose_model(an, 2.0, 0.0)
    n = m.shape[0]
    one = np.ones(n)
    pol = compute_policy(
        PolicyInputs(
            annual_demand=an.rate * 52,
            demand_per_period=an.rate,
            demand_sd_per_period=an.sd,
            lead_time_days=14 * one,
            lead_time_sd_days=0 * one,
            unit_cost=one,
            order_cost=one,
            holding_rate=0.25 * one,
            measure=np.full(n, "cycle service", dtype=object),
            service_target=0.95 * one,
            shortage_cost=np.full(n, math.nan),
            pack_size=one,
            minimum_order=0 * one,
            days_per_period=7.0,
            model=model,
        )
    )
    achieved = stats.poisson.cdf(pol["reorder_point"].to_numpy(), 1.6)
    assert abs(achieved.mean() - 0.95) < 0.02
    assert (model == "poisson").mean() > 0.8


def test_history_rows_by_hash_lookup_equal_the_dictionary_rule() -> None:
    """Items find their History row by a hash index; the reference is the rule it replaces,
    a dictionary from code to row (the last row of a repeated code), item by item."""
    from xlpolicy.planner import _history_rows

    rng = np.random.default_rng(5)
    pool = [f"{k:06d}" for k in range(400)] + ["123", "0123", "A-1", "a-1"]
    hist = list(rng.choice(pool, 300, replace=False))
    codes = np.array(list(rng.choice(pool, 1000)), dtype=object)
    for items in (hist, hist + hist[:7]):  # unique, and with repeated codes
        pos = {code: i for i, code in enumerate(items)}
        want = np.array([pos.get(c, -1) for c in codes], dtype=np.int64)
        got = _history_rows(items, codes)
        assert got.dtype == np.int64
        np.testing.assert_array_equal(got, want)
    assert (_history_rows(hist, codes) == -1).any()
