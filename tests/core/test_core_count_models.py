"""Poisson, negative binomial and gamma lead-time demand, and a model per item in the policy.

References: scipy.stats (the distributions themselves), brute-force sums over the pmf,
scipy.integrate.quad, Poisson table values, and Monte Carlo simulation.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats

import xlpolicy.core.policy as policy_mod
from xlpolicy.contract import DEMAND_MODELS
from xlpolicy.core import (
    MODEL_NAMES,
    GammaLeadTimeDemand,
    NegativeBinomialLeadTimeDemand,
    NormalLeadTimeDemand,
    PoissonLeadTimeDemand,
    compute_policy,
    model_factory,
)
from xlpolicy.core.policy import PolicyInputs

MEANS = np.array([0.3, 2.0, 6.5, 40.0, 250.0])
SDS = np.array([1.1, 2.5, 4.0, 9.0, 40.0])  # variance above the mean: a true negative binomial


def ref_dist(name: str, mean: float, sd: float) -> stats.rv_frozen:
    """The scipy.stats distribution a model stands for (matched mean and variance)."""
    var = sd * sd
    if name == "normal":
        return stats.norm(mean, sd)
    if name == "poisson" or (name == "negative binomial" and var <= mean):
        return stats.poisson(mean)
    if name == "negative binomial":
        return stats.nbinom(mean * mean / (var - mean), mean / var)
    return stats.gamma(mean * mean / var, scale=var / mean)


def support_top(dist: stats.rv_frozen) -> int:
    """A whole number far enough in the upper tail that the pmf beyond it is negligible."""
    return int(dist.mean() + 400.0 * dist.std() + 3000.0)  # pmf there is below 1e-300


def brute_shortage(dist: stats.rv_frozen, r: float) -> float:
    """E[(X - r)^+] for a count X by summing (k - r) pmf(k) over whole k; mean - r if r < 0."""
    if r < 0:
        return float(dist.mean()) - r
    k = np.arange(math.floor(r) + 1, support_top(dist))
    return float(np.sum((k - r) * dist.pmf(k)))


def quad_shortage(dist: stats.rv_frozen, r: float) -> float:
    """E[(X - r)^+] for a continuous X by scipy.integrate.quad of sf over (r, inf)."""
    # E[(X - r)^+] = integral_r^inf P(X > x) dx (any probability text)
    lo = max(r, 0.0)
    val, _ = integrate.quad(lambda x: dist.sf(x), lo, np.inf, limit=200, epsabs=1e-13, epsrel=1e-11)
    return val + (lo - r)


def make(n: int, model: object, **over: object) -> PolicyInputs:
    """PolicyInputs for n items with daily periods; lead-time demand = d * L by default."""
    base: dict[str, object] = {
        "annual_demand": 365.0,
        "demand_per_period": 1.0,
        "demand_sd_per_period": 1.0,
        "lead_time_days": 6.0,
        "lead_time_sd_days": 0.0,
        "unit_cost": 20.0,
        "order_cost": 30.0,
        "holding_rate": 0.25,
        "measure": "cycle service",
        "service_target": 0.95,
        "shortage_cost": np.nan,
        "pack_size": 1.0,
        "minimum_order": 0.0,
    }
    base.update(over)
    cols: dict[str, np.ndarray] = {}
    for key, val in base.items():
        dtype = object if key == "measure" else float
        cols[key] = np.broadcast_to(np.asarray(val, dtype=dtype), (n,)).copy()
    models = np.broadcast_to(np.asarray(model, dtype=object), (n,)).copy()
    return PolicyInputs(**cols, days_per_period=1.0, model=models)


# ---------------------------------------------------------------------------------------
# Names
# ---------------------------------------------------------------------------------------


def test_model_names_and_factory() -> None:
    assert MODEL_NAMES == DEMAND_MODELS  # the workbook contract lists the same names
    assert model_factory(" Negative Binomial ") is NegativeBinomialLeadTimeDemand
    assert model_factory("gamma") is GammaLeadTimeDemand
    assert model_factory("poisson") is PoissonLeadTimeDemand
    assert model_factory("normal") is NormalLeadTimeDemand
    for name in MODEL_NAMES:
        assert model_factory(name).name == name
    with pytest.raises(ValueError):
        model_factory("lognormal")


# ---------------------------------------------------------------------------------------
# Each model against scipy.stats and brute force
# ---------------------------------------------------------------------------------------


@pytest.mark.parametrize("name", ["poisson", "negative binomial", "gamma"])
def test_cdf_sf_quantile_match_scipy(name: str) -> None:
    m = model_factory(name)(MEANS, SDS)
    r = np.array([[-1.0], [0.0], [0.5], [1.0], [3.7], [7.0], [42.2], [300.0], [600.0]])
    for j, (mu, sd) in enumerate(zip(MEANS, SDS, strict=True)):
        ref = ref_dist(name, mu, sd)  # scipy.stats is the reference
        np.testing.assert_allclose(m.cdf(r)[:, j], ref.cdf(r[:, 0]), rtol=1e-12, atol=1e-300)
        np.testing.assert_allclose(m.sf(r)[:, j], ref.sf(r[:, 0]), rtol=1e-12, atol=1e-300)
        p = np.array([0.01, 0.3, 0.5, 0.9, 0.95, 0.999])
        q = m.quantile(p[:, None])[:, j]
        if name == "gamma":
            np.testing.assert_allclose(q, ref.ppf(p), rtol=1e-10)
            tails = np.array([0.3, 1e-3, 1e-9, 1e-30])
            np.testing.assert_allclose(
                m.upper_quantile(tails[:, None])[:, j], ref.isf(tails), rtol=1e-9
            )
        else:
            # scipy's ppf convention: the smallest whole k with cdf(k) >= p
            np.testing.assert_array_equal(q, ref.ppf(p))
            assert (ref.cdf(q) >= p).all() and (ref.cdf(q - 1) < p).all()


@pytest.mark.parametrize("name", ["poisson", "negative binomial"])
def test_count_upper_quantile_is_exact_even_for_tiny_tails(name: str) -> None:
    m = model_factory(name)(MEANS, SDS)
    tails = np.array([0.5, 0.05, 1e-4, 1e-9, 1e-15, 1e-40])
    got = m.upper_quantile(tails[:, None])
    for j, (mu, sd) in enumerate(zip(MEANS, SDS, strict=True)):
        ref = ref_dist(name, mu, sd)
        k = np.arange(0, support_top(ref))
        sf = ref.sf(k)  # scipy.stats sf, scanned: the smallest whole k with sf(k) <= tail
        for i, t in enumerate(tails):
            assert got[i, j] == k[np.argmax(sf <= t)]
    # scipy's own isf goes through 1 - tail and loses tiny tails; ours does not
    assert (
        np.isnan(stats.poisson.isf(1e-20, 3.0))
        and np.isfinite(PoissonLeadTimeDemand(3.0, 0.0).upper_quantile(1e-20)).all()
    )


@pytest.mark.parametrize("name", ["poisson", "negative binomial"])
def test_count_expected_shortage_matches_brute_force_sum(name: str) -> None:
    m = model_factory(name)(MEANS, SDS)
    rs = [-2.5, 0.0, 0.4, 1.0, 2.0, 5.5, 9.0, 30.0, 61.25, 300.0, 420.0]
    got = m.expected_shortage(np.array(rs)[:, None])
    for j, (mu, sd) in enumerate(zip(MEANS, SDS, strict=True)):
        ref = ref_dist(name, mu, sd)
        for i, r in enumerate(rs):
            # brute force: sum over the pmf; for r < 0 every unit is short, mean - r
            assert got[i, j] == pytest.approx(brute_shortage(ref, r), rel=1e-9, abs=1e-300)


def test_gamma_expected_shortage_matches_quad() -> None:
    m = GammaLeadTimeDemand(MEANS, SDS)
    rs = [-2.0, 0.0, 0.4, 3.0, 9.0, 40.0, 80.0, 300.0, 420.0]
    got = m.expected_shortage(np.array(rs)[:, None])
    for j, (mu, sd) in enumerate(zip(MEANS, SDS, strict=True)):
        ref = ref_dist("gamma", mu, sd)
        for i, r in enumerate(rs):
            # scipy.integrate.quad of the survival function is the reference
            assert got[i, j] == pytest.approx(quad_shortage(ref, r), rel=1e-7, abs=1e-15)


def test_poisson_table_values_by_hand() -> None:
    # Poisson table, mean 2 (common practice; any statistics table):
    # P(X <= 3) = 0.8571, P(X <= 4) = 0.9473, P(X <= 5) = 0.9834
    m = PoissonLeadTimeDemand(np.array([2.0]), np.array([9.0]))  # the sd is ignored
    assert m.cdf(3.0)[0] == pytest.approx(0.8571, abs=5e-5)
    assert m.cdf(4.0)[0] == pytest.approx(0.9473, abs=5e-5)
    assert m.cdf(5.0)[0] == pytest.approx(0.9834, abs=5e-5)
    assert m.cdf(4.99)[0] == m.cdf(4.0)[0]  # whole units: P(X <= floor(r))
    # so a 95 % cycle service needs R = 5 and 94 % needs R = 4 (Axsäter 2015 ch. 5 rule:
    # the smallest R with P(X <= R) >= target)
    assert m.quantile(0.95)[0] == 5.0 and m.quantile(0.94)[0] == 4.0
    # by hand from the table: E[(X - 4)^+] = 2 P(X >= 4) - 4 P(X >= 5)
    #   = 2 (1 - 0.8571) - 4 (1 - 0.9473) = 0.0750 (to table rounding)
    assert m.expected_shortage(4.0)[0] == pytest.approx(0.0750, abs=5e-4)
    # cross-check with scipy.stats exactly
    assert m.expected_shortage(4.0)[0] == pytest.approx(
        2 * stats.poisson.sf(3, 2.0) - 4 * stats.poisson.sf(4, 2.0), rel=1e-13
    )
    assert m.sd[0] == pytest.approx(math.sqrt(2.0))


@pytest.mark.parametrize("name", ["poisson", "negative binomial", "gamma"])
def test_min_r_for_shortage_is_the_smallest_such_r(name: str) -> None:
    m = model_factory(name)(MEANS, SDS)
    for frac in (0.9, 0.3, 0.05, 1e-3, 1e-7):
        target = frac * MEANS
        r = m.min_r_for_shortage(target)
        np.testing.assert_allclose(m.expected_shortage(r), target, rtol=1e-9)
        assert (m.expected_shortage(r - 1e-6 * (1 + np.abs(r))) > target).all()
    # at or above the mean, every unit below zero counts: r = mean - target (exact)
    np.testing.assert_allclose(m.min_r_for_shortage(MEANS + 2.0), -2.0 * np.ones(5))
    assert np.isinf(m.min_r_for_shortage(np.zeros(5))).all()
    assert np.isnan(m.min_r_for_shortage(-np.ones(5))).all()


def test_point_masses_and_bad_parameters_are_quiet() -> None:
    mean = np.array([0.0, 7.0, np.nan, -1.0, 5.0])
    sd = np.array([0.0, 0.0, 1.0, 1.0, np.nan])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        g = GammaLeadTimeDemand(mean, sd)
        # sd = 0 or mean = 0: demand is the mean exactly
        np.testing.assert_array_equal(g.cdf(np.array([0.0, 6.9, 1, 1, 1]))[:2], [1.0, 0.0])
        np.testing.assert_array_equal(g.quantile(0.99)[:2], [0.0, 7.0])
        np.testing.assert_array_equal(g.expected_shortage(3.0)[:2], [0.0, 4.0])
        np.testing.assert_array_equal(g.min_r_for_shortage(1.0)[:2], [-1.0, 6.0])
        assert np.isnan(g.cdf(1.0)[2:]).all() and np.isnan(g.quantile(0.5)[2:]).all()
        p = PoissonLeadTimeDemand(mean, sd)
        # Poisson ignores sd; mean 0 is a point mass at 0
        np.testing.assert_array_equal(p.quantile(0.99)[:2], [0.0, stats.poisson.ppf(0.99, 7)])
        assert p.upper_quantile(1e-6)[0] == 0.0 and p.expected_shortage(0.0)[0] == 0.0
        assert np.isnan(p.cdf(1.0)[2:4]).all() and np.isfinite(p.cdf(1.0)[4])
        nb = NegativeBinomialLeadTimeDemand(mean, sd)
        # sd = 0 is not over-dispersed: Poisson with the same mean
        assert list(nb.item_model_names()[:2]) == ["negative binomial", "poisson"]
        assert nb.cdf(7.0)[1] == pytest.approx(stats.poisson.cdf(7, 7.0), rel=1e-14)
        assert np.isnan(nb.expected_shortage(1.0)[2:]).all()


# ---------------------------------------------------------------------------------------
# Reorder points under each model, against brute force with scipy.stats
# ---------------------------------------------------------------------------------------


def random_items(k: int, seed: int, measure: str) -> PolicyInputs:
    rng = np.random.default_rng(seed)
    d = rng.uniform(0.05, 30.0, k)
    names = np.array(list(MODEL_NAMES) * (k // 4), dtype=object)
    return make(
        k,
        names,
        annual_demand=d * 365,
        demand_per_period=d,
        demand_sd_per_period=d * rng.uniform(0.3, 3.0, k),
        lead_time_days=rng.uniform(1, 20, k),
        order_cost=rng.uniform(2, 100, k),
        pack_size=rng.integers(1, 6, k).astype(float),
        measure=measure,
        service_target=rng.uniform(0.6, 0.995, k),
    )


def test_cycle_service_reorder_point_by_brute_force_under_each_model() -> None:
    out = compute_policy(random_items(120, 31, "cycle service"))
    assert out["reorder_point"].notna().all()
    for _, row in out.iterrows():
        ref = ref_dist(row["model"], row["lead_time_demand_mean"], row["lead_time_demand_sd"])
        r, t = row["reorder_point"], row["service_target"]
        # scipy.stats: R is the smallest whole number with P(X <= R) >= target
        assert r == round(r) and r >= 0
        assert ref.cdf(r) >= t - 1e-12
        assert r == 0 or ref.cdf(r - 1) < t
        assert row["cycle_service"] == pytest.approx(ref.cdf(r), rel=1e-10)


def test_fill_rate_reorder_point_by_brute_force_under_each_model() -> None:
    out = compute_policy(random_items(80, 32, "fill rate"))
    assert out["reorder_point"].notna().all()
    for _, row in out.iterrows():
        name = row["model"]
        ref = ref_dist(name, row["lead_time_demand_mean"], row["lead_time_demand_sd"])
        r, q, t = row["reorder_point"], row["order_qty"], row["service_target"]

        def short(x: float, ref: stats.rv_frozen = ref, name: str = name) -> float:
            if name == "gamma":
                return quad_shortage(ref, x)  # scipy.integrate.quad
            if name == "normal":  # scipy.stats loss function sigma (phi(z) - z (1 - Phi(z)))
                z = (x - ref.mean()) / ref.std()
                return ref.std() * (stats.norm.pdf(z) - z * stats.norm.sf(z))
            return brute_shortage(ref, x)  # sum over the pmf

        # R is the smallest whole number with 1 - E[(X - R)^+] / Q >= target
        assert r == round(r) and r >= 0
        assert 1 - short(r) / q >= t - 1e-9
        assert row["fill_rate"] == pytest.approx(1 - short(r) / q, rel=1e-8)
        if r > 0 and not row["flag_reorder_point_floored"]:
            assert 1 - short(r - 1) / q < t


# ---------------------------------------------------------------------------------------
# Simulation: the achieved service under the true distribution
# ---------------------------------------------------------------------------------------


def draw(rng: np.random.Generator, name: str, mean: float, sd: float, size: int) -> np.ndarray:
    """Lead-time demand drawn by numpy from the distribution the model stands for."""
    var = sd * sd
    if name == "normal":
        return rng.normal(mean, sd, size)
    if name == "poisson":
        return rng.poisson(mean, size).astype(float)
    if name == "negative binomial":  # numpy's (n, p): failures before n successes, as scipy
        return rng.negative_binomial(mean * mean / (var - mean), mean / var, size).astype(float)
    return rng.gamma(mean * mean / var, var / mean, size)


@pytest.mark.parametrize("name", MODEL_NAMES)
def test_simulated_service_matches_reported(name: str) -> None:
    rng = np.random.default_rng(list(MODEL_NAMES).index(name) + 500)
    inp = make(
        2,
        name,
        demand_per_period=1.2,
        demand_sd_per_period=1.5,
        lead_time_days=5.0,
        annual_demand=1.2 * 365,
        order_cost=4.0,
        measure=np.array(["cycle service", "fill rate"], dtype=object),
        service_target=np.array([0.9, 0.97]),
    )
    out = compute_policy(inp)
    mean, sd = out["lead_time_demand_mean"][0], out["lead_time_demand_sd"][0]
    n = 200_000
    x = draw(rng, name, mean, sd, n)
    for j in range(2):
        r, q = out["reorder_point"][j], out["order_qty"][j]
        # cycle service: fraction of cycles with lead-time demand <= R (binomial SE)
        csl = float(np.mean(x <= r))
        se_c = math.sqrt(csl * (1 - csl) / n)
        assert abs(csl - out["cycle_service"][j]) < 5 * se_c + 1e-9
        # fill rate: 1 - mean units short per cycle / Q (sample SE of the mean)
        s = np.maximum(x - r, 0.0)
        se_f = s.std(ddof=1) / math.sqrt(n) / q
        assert abs(1 - s.mean() / q - out["fill_rate"][j]) < 5 * se_f + 1e-9
    assert out["cycle_service"][0] >= 0.9 and out["fill_rate"][1] >= 0.97


# ---------------------------------------------------------------------------------------
# Shortage cost with discrete models: brute force over whole (Q, R)
# ---------------------------------------------------------------------------------------


def shortage_items(name: str, k: int = 40) -> PolicyInputs:
    rng = np.random.default_rng(44)
    d = rng.uniform(0.1, 20, k)
    return make(
        k,
        name,
        annual_demand=d * 365,
        demand_per_period=d,
        demand_sd_per_period=d * rng.uniform(0.5, 3, k),
        lead_time_days=rng.uniform(1, 30, k),
        unit_cost=rng.uniform(1, 80, k),
        order_cost=rng.uniform(1, 80, k),
        measure="shortage cost",
        shortage_cost=rng.exponential(40, k),
        service_target=np.nan,
    )


@pytest.mark.parametrize("name", ["poisson", "negative binomial"])
def test_shortage_cost_under_count_models_is_the_brute_force_optimum(name: str) -> None:
    inp = shortage_items(name)
    out = compute_policy(inp)
    checked = 0
    for j in range(len(out)):
        row = out.iloc[j]
        if row["flag_no_safety_stock_pays"]:
            continue  # R = mu_L by convention there, not a cost optimum
        checked += 1
        D, S, p = row["annual_demand"], inp.order_cost[j], inp.shortage_cost[j]
        H = inp.holding_rate[j] * inp.unit_cost[j]
        ref = ref_dist(row["model"], row["lead_time_demand_mean"], row["lead_time_demand_sd"])
        mu = ref.mean()
        r0 = int(row["reorder_point"])
        rs = np.arange(max(r0 - 12, 0), r0 + 13)
        es = np.array([brute_shortage(ref, r) for r in rs])  # sum over the pmf
        qs = np.arange(1, int(3 * row["order_qty"]) + 50, dtype=float)[:, None]
        # expected annual cost with backorders (Hadley & Whitin 1963) over whole (Q, R):
        # ours is the cheapest pair of its neighbourhood (a local optimum, as the iteration
        # promises; a skewed model with cheap backorders can cost less still at R = 0)
        grid = D * S / qs + H * (qs / 2 + rs[None, :] - mu) + p * D / qs * es[None, :]
        assert row["annual_total_cost"] == pytest.approx(grid.min(), rel=1e-9)
        assert grid.min() == pytest.approx(
            D * S / row["order_qty"]
            + H * (row["order_qty"] / 2 + r0 - mu)
            + p * D / row["order_qty"] * brute_shortage(ref, r0),
            rel=1e-9,
        )
    assert checked >= 30


@pytest.mark.parametrize("name", ["poisson", "negative binomial", "gamma"])
def test_bracketing_fallback_agrees_with_iteration(
    name: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    inp = shortage_items(name, 60)
    iterated = compute_policy(inp)
    monkeypatch.setattr(policy_mod, "SHORTAGE_MAX_ITER", 0)  # every item by bracketing
    bracketed = compute_policy(inp)
    # the two solvers reach the same whole-unit policy
    for col in ("order_qty", "reorder_point", "flag_no_safety_stock_pays"):
        np.testing.assert_array_equal(iterated[col], bracketed[col])
    assert not iterated["flag_no_safety_stock_pays"].all()


# ---------------------------------------------------------------------------------------
# A model per item
# ---------------------------------------------------------------------------------------


def test_mixed_batch_equals_each_group_alone_in_row_order() -> None:
    rng = np.random.default_rng(5)
    k = 40
    d = rng.uniform(0.1, 40, k)
    names = rng.choice(np.array(list(MODEL_NAMES) + ["", None], dtype=object), k)
    names[:6] = ["gamma", None, "poisson", " Negative Binomial", "negative binomial", ""]
    sd = d * rng.uniform(0.2, 2.5, k)
    sd[4] = 0.0  # variance 0 <= mean: this negative binomial item falls back to Poisson
    inp = make(
        k,
        names,
        annual_demand=d * 365,
        demand_per_period=d,
        demand_sd_per_period=sd,
        lead_time_days=rng.uniform(1, 30, k),
        order_cost=rng.uniform(1, 50, k),
        measure=rng.choice(
            np.array(["cycle service", "fill rate", "shortage cost"], dtype=object), k
        ),
        shortage_cost=rng.uniform(5, 60, k),
        service_target=rng.uniform(0.7, 0.99, k),
    )
    mixed = compute_policy(inp)
    assert len(mixed) == k and isinstance(mixed.index, pd.RangeIndex)
    np.testing.assert_array_equal(mixed["annual_demand"], d * 365)  # row order kept
    expected_names = np.where(pd.isna(names) | (names == ""), "normal", names)
    expected_names = np.char.lower(np.char.strip(expected_names.astype(str)))
    expected_names[4] = "poisson"
    assert mixed["model"].tolist() == expected_names.tolist()
    for key in ["normal", *MODEL_NAMES[1:]]:
        grp = np.flatnonzero(
            np.char.lower(np.char.strip(np.where(pd.isna(names), "", names).astype(str)))
            == ("" if key == "normal" else key)
        )
        if key == "normal":
            grp = np.union1d(grp, np.flatnonzero(np.asarray(names == "normal")))
        sub = PolicyInputs(
            **{
                f: (
                    getattr(inp, f)[grp]
                    if f != "days_per_period" and getattr(inp, f) is not None
                    else getattr(inp, f)
                )
                for f in PolicyInputs.__dataclass_fields__
            }
        )
        alone = compute_policy(sub)
        got = mixed.iloc[grp].reset_index(drop=True)
        pd.testing.assert_frame_equal(got, alone, check_dtype=False)
    # flag_normal_doubtful only under the normal model
    assert not mixed.loc[mixed["model"] != "normal", "flag_normal_doubtful"].any()
    assert mixed.loc[mixed["model"] == "normal", "flag_normal_doubtful"].any()


def test_model_factory_applies_to_items_without_a_name() -> None:
    inp = make(
        3,
        np.array([None, "normal", ""], dtype=object),
        demand_per_period=2.0,
        demand_sd_per_period=3.0,
    )
    out = compute_policy(inp, model_factory=GammaLeadTimeDemand)
    assert out["model"].tolist() == ["gamma", "normal", "gamma"]
    ref = stats.gamma(12.0**2 / 54.0, scale=54.0 / 12.0)  # mean 12, variance 9 * 6 = 54
    assert out["reorder_point"][0] == math.ceil(ref.ppf(0.95))  # scipy.stats
    # no names at all: the old single-model call
    inp.model = None
    assert (compute_policy(inp)["model"] == "normal").all()


def test_unknown_model_name_gives_nan_not_an_error() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = compute_policy(make(2, np.array(["Weibull ", "poisson"], dtype=object)))
    assert out["model"].tolist() == ["Weibull", "poisson"]
    assert np.isnan(out["reorder_point"][0]) and np.isfinite(out["reorder_point"][1])
    assert not out["flag_normal_doubtful"][0]


# ---------------------------------------------------------------------------------------
# Property: the reorder point never falls as the target rises
# ---------------------------------------------------------------------------------------


@settings(max_examples=60, deadline=None)
@given(
    name=st.sampled_from(MODEL_NAMES),
    measure=st.sampled_from(["cycle service", "fill rate"]),
    d=st.floats(min_value=0.01, max_value=200.0),
    cv=st.floats(min_value=0.0, max_value=4.0),
    lt=st.floats(min_value=0.5, max_value=60.0),
    t1=st.floats(min_value=0.01, max_value=0.999),
    t2=st.floats(min_value=0.01, max_value=0.999),
)
def test_reorder_point_never_falls_as_target_rises(
    name: str, measure: str, d: float, cv: float, lt: float, t1: float, t2: float
) -> None:
    lo, hi = min(t1, t2), max(t1, t2)
    out = compute_policy(
        make(
            2,
            name,
            annual_demand=d * 365,
            demand_per_period=d,
            demand_sd_per_period=cv * d,
            lead_time_days=lt,
            measure=measure,
            service_target=np.array([lo, hi]),
        )
    )
    r = out["reorder_point"].to_numpy()
    assert np.isfinite(r).all()
    assert r[0] <= r[1]
    assert (r >= 0).all()


def test_count_quantile_search_equals_scipy_ppf_on_random_items() -> None:
    """The count models find the smallest whole k with cdf(k) >= p by a search on the cdf;
    references: scipy.stats.nbinom.ppf and poisson.ppf (matched mean and variance), and
    the defining property checked with scipy's cdf on both sides of k."""
    rng = np.random.default_rng(19)
    n = 3000
    mean = np.exp(rng.uniform(np.log(0.05), np.log(3000.0), n))
    sd = np.sqrt(mean) * np.exp(rng.uniform(0.01, 1.5, n))  # variance above the mean
    p = np.concatenate(
        [rng.uniform(0.5, 0.9999, n - 8), [1e-9, 1e-4, 0.01, 0.5, 0.999999, 1 - 1e-12, 0.0, 1.0]]
    )
    var = sd * sd
    for model, ref in (
        (
            NegativeBinomialLeadTimeDemand(mean, sd),
            stats.nbinom(mean * mean / (var - mean), mean / var),
        ),
        (PoissonLeadTimeDemand(mean, sd), stats.poisson(mean)),
    ):
        k = model.quantile(p)
        np.testing.assert_array_equal(k[:-2], ref.ppf(p)[:-2])  # p = 0: ours says -inf
        inner = (p > 0) & (p < 1)
        assert (ref.cdf(k)[inner] >= p[inner]).all()
        assert (ref.cdf(k - 1.0)[inner] < p[inner]).all()
        assert k[-2] == -np.inf and k[-1] == np.inf
