"""Properties of the policy core that must hold for any sensible input (hypothesis)."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from xlpolicy.contract import SERVICE_MEASURES
from xlpolicy.core.policy import PolicyInputs, compute_policy, order_cost_terms

FAST = settings(max_examples=40, deadline=None)

demand = st.floats(min_value=0.2, max_value=500.0)
spread = st.floats(min_value=0.0, max_value=300.0)
lead = st.floats(min_value=0.5, max_value=90.0)
target_hi = st.floats(min_value=0.5, max_value=0.999)  # mu + z sigma rises with L only for z >= 0
cost = st.floats(min_value=0.05, max_value=500.0)
order = st.floats(min_value=0.0, max_value=300.0)
rate = st.floats(min_value=0.02, max_value=0.6)
pack = st.integers(min_value=1, max_value=48)
moq = st.floats(min_value=0.0, max_value=1000.0)
measure_svc = st.sampled_from(["cycle service", "fill rate"])


def inputs(rows: list[dict[str, object]], days_per_period: float = 7.0) -> PolicyInputs:
    """PolicyInputs from row dicts; weekly periods, 52 a year."""

    def col(key: str, default: float) -> np.ndarray:
        return np.array([float(r.get(key, default)) for r in rows])  # type: ignore[arg-type]

    d = col("d", 10.0)
    return PolicyInputs(
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=col("sd", 3.0),
        lead_time_days=col("lt", 14.0),
        lead_time_sd_days=col("slt", 0.0),
        unit_cost=col("c", 10.0),
        order_cost=col("S", 40.0),
        holding_rate=col("i", 0.25),
        measure=np.array([r.get("measure", "cycle service") for r in rows], dtype=object),
        service_target=col("t", 0.95),
        shortage_cost=col("p", np.nan),
        pack_size=col("pack", 1.0),
        minimum_order=col("moq", 0.0),
        days_per_period=days_per_period,
    )


@FAST
@given(
    D=st.floats(min_value=1.0, max_value=1e6),
    S=st.floats(min_value=0.01, max_value=1e4),
    H=st.floats(min_value=0.01, max_value=1e3),
    delta=st.floats(min_value=1e-3, max_value=0.9),
)
def test_eoq_minimises_ordering_plus_holding(D: float, S: float, H: float, delta: float) -> None:
    # Harris (1913) / Wilson (1934): Q* = sqrt(2 D S / H) minimises D S / Q + H Q / 2
    q = np.sqrt(2 * D * S / H)
    at = order_cost_terms(q, D, S, H)
    for other in (q * (1 - delta), q * (1 + delta)):
        assert at <= order_cost_terms(other, D, S, H) * (1 + 1e-12)
    # and the EOQ that compute_policy reports is that Q*
    out = compute_policy(inputs([{"d": D / 52, "S": S, "c": H, "i": 1.0}]))
    assert np.isclose(out["eoq"][0], q, rtol=1e-12)


@FAST
@given(
    d=demand,
    sd=spread,
    lt=lead,
    slt=st.floats(0, 10),
    t1=target_hi,
    t2=target_hi,
    measure=measure_svc,
    S=order,
    pk=pack,
)
def test_reorder_point_never_falls_as_target_rises(
    d: float,
    sd: float,
    lt: float,
    slt: float,
    t1: float,
    t2: float,
    measure: str,
    S: float,
    pk: int,
) -> None:
    lo, hi = sorted((t1, t2))
    base = {"d": d, "sd": sd, "lt": lt, "slt": slt, "measure": measure, "S": S, "pack": pk}
    out = compute_policy(inputs([{**base, "t": lo}, {**base, "t": hi}]))
    assert out["reorder_point"][0] <= out["reorder_point"][1]


@FAST
@given(d=demand, sd=spread, lt1=lead, lt2=lead, t=target_hi, measure=measure_svc, S=order, pk=pack)
def test_reorder_point_never_falls_as_lead_time_rises(
    d: float, sd: float, lt1: float, lt2: float, t: float, measure: str, S: float, pk: int
) -> None:
    lo, hi = sorted((lt1, lt2))
    base = {"d": d, "sd": sd, "t": t, "measure": measure, "S": S, "pack": pk}
    out = compute_policy(inputs([{**base, "lt": lo}, {**base, "lt": hi}]))
    assert out["reorder_point"][0] <= out["reorder_point"][1]


@FAST
@given(d=demand, sd1=spread, sd2=spread, lt=lead, t=target_hi, measure=measure_svc, S=order)
def test_safety_stock_grows_with_demand_sd(
    d: float, sd1: float, sd2: float, lt: float, t: float, measure: str, S: float
) -> None:
    lo, hi = sorted((sd1, sd2))
    base = {"d": d, "lt": lt, "t": t, "measure": measure, "S": S}
    out = compute_policy(inputs([{**base, "sd": lo}, {**base, "sd": hi}]))
    assert out["safety_stock"][0] <= out["safety_stock"][1] + 1e-9


@FAST
@given(
    rows=st.lists(
        st.fixed_dictionaries(
            {
                "d": demand,
                "sd": spread,
                "lt": lead,
                "slt": st.floats(0, 10),
                "c": cost,
                "S": order,
                "i": rate,
                "t": st.floats(min_value=0.05, max_value=0.999),
                "measure": st.sampled_from(list(SERVICE_MEASURES)),
                "p": st.floats(min_value=0.0, max_value=500.0),
                "pack": pack,
                "moq": moq,
            }
        ),
        min_size=1,
        max_size=6,
    )
)
def test_order_qty_is_allowed_and_costs_add_up(rows: list[dict[str, object]]) -> None:
    out = compute_policy(inputs(rows))
    q = out["order_qty"].to_numpy()
    pk = np.array([r["pack"] for r in rows], dtype=float)
    mo = np.array([r["moq"] for r in rows], dtype=float)
    assert np.isfinite(q).all()
    # a positive whole multiple of the pack size, at least the minimum order
    assert (q >= pk).all() and (q >= mo).all()
    np.testing.assert_array_equal(np.mod(q, pk), 0.0)
    r = out["reorder_point"].to_numpy()
    assert (r >= 0).all() and (r == np.round(r)).all()
    # total = ordering + cycle holding + safety holding + shortage (contract)
    parts = (
        out["annual_ordering_cost"]
        + out["annual_cycle_holding_cost"]
        + out["annual_safety_holding_cost"]
        + out["annual_shortage_cost"]
    )
    np.testing.assert_allclose(out["annual_total_cost"], parts, rtol=1e-12, atol=1e-9)
    assert ((out["fill_rate"] >= 0) & (out["fill_rate"] <= 1)).all()
