"""Back-test of continuous-review (Q, R) policies: simulate each item's policy on demand.

Vectorised over items x replications with numpy; the only Python loops run over time
periods and over chunks of items (to bound memory), never over single items. Seeded with a
numpy Generator, so a run is reproducible.

How a period is simulated (the discretisation, stated so the figures can be judged):

* Time moves in the history's periods. Stock is reviewed at the end of each period: when
  the inventory position (on hand + on order - backordered) is at or below R, the smallest
  whole number of order quantities that lifts it above R is ordered (one order of k Q).
* Lead time. L = lead time in periods may be fractional, L = whole part + f. Demand of a
  period comes in two parts: the first share f of the period, then the rest; with fixed
  lead time an order placed at the end of period t arrives between the two parts of period
  t + 1 + floor(L), so exactly L periods of demand fall in its lead time. Each part's
  demand arrives at once. When the lead time varies (sd > 0), each order draws a lead time
  X from a gamma distribution with mean L, and the whole part floor(L) is replaced by
  X - f rounded at random to a neighbouring whole number (keeping the mean). The rounding
  adds variance (up to 1/6 period^2 once the lead time is spread over a period or more),
  so the gamma is drawn with the variance that, with the rounding's added, gives the
  item's (:func:`lead_draw_variance`; exact for a normal spread, close for the gamma's).
  Two orders due in the same period arrive together and count as one cycle.
* Demand per part: a history period's demand D is split at random between the two parts,
  by the law of the item's demand model for the part given the whole period (so the part
  holding the share f of the period has mean f d and variance f s^2, as f of a period of
  independent demand has, not the f^2 s^2 of an even split): normal, the Brownian bridge
  f D + sqrt(f (1 - f)) s Z; Poisson, each unit of D falls in the first part with
  probability f (binomial); negative binomial (a Poisson stream whose rate is a gamma
  process), binomial with a Beta(r f, r (1 - f)) probability; gamma and any other model,
  the share Beta(k f, k (1 - f)) of D with k = d^2 / s^2 (a gamma process). Each gives the
  part the variance f s^2 whatever D's distribution, given the period's mean d and sd s
  (worked out in :func:`part_splitter`); both parts add up to D, so the history's totals
  are kept. Draws from a model are split exactly: normal, Poisson, negative binomial
  and gamma demand are infinitely divisible, so the two parts are drawn from the same
  family with means and variances f and (1 - f) of the period's, and the lead-time demand
  has exactly the mean d L and variance L s^2 the analytic model uses. Normal draws can be
  negative (the normal model allows it); they are kept, as returns.
* Undershoot. A period's demand can take the position below R before the end-of-period
  review; continuous review would have ordered when it reached R. The service figures
  count each order as placed at R (the analytic model's assumption): a replenishment
  cycle is stocked out when the net stock just before the order arrives, plus the
  undershoot below R at which it was placed, is negative, i.e. when the demand over the
  order's lead time exceeds R. Units short in a cycle: that shortfall (at most the
  lead-time demand); fill rate = 1 - units short / units ordered, over the cycles, which
  is the analytic 1 - n(R) / Q. On-hand stock, orders and costs come from the simulated
  path as it is, so the average on hand runs below the analytic Q/2 + safety stock by
  about the average undershoot (the end-of-period review orders that much late).
* Lost sales (a setting): demand finding no stock is lost instead of backordered; a
  cycle is stocked out when more than the undershoot was lost during its lead time.
* Start and warm-up. Each replication starts with nothing on order and a position drawn
  evenly between R and R + Q (close to its long-run spread; a replay starts at
  R + Q, just after a delivery). Orders placed and periods before the warm-up of
  ceil(L + 2 sd) + 1 periods are left out of every figure.

Confidence band: replications are independent, so the 95 % band of a ratio (cycles stocked
out / cycles, units short / units ordered) is the ratio estimate +- 1.96 standard errors by
the delta method over replications (common practice in simulation output analysis). A
single replay has a Wilson score interval over its cycles instead (Wilson 1927), which
treats its cycles as independent. The band says how well the simulation pins down the
service on the given demand; for resamples of one history, :func:`history_band` widens it
for what the history itself cannot tell.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

__all__ = [
    "HistoryReplay",
    "BlockBootstrap",
    "ModelDraws",
    "SimulationResult",
    "simulate_policy",
    "block_length",
    "part_splitter",
    "service_check",
    "history_band",
    "SIMULATION_COLUMNS",
    "Z_BAND",
]

#: Half-width of the confidence band in standard errors (95 %, two-sided).
Z_BAND = 1.959963984540054
#: Cells (items x replications) simulated at once: small enough to stay in the CPU's cache.
_CHUNK_CELLS = 20_000
#: Lead times longer than mean + this many sd are cut there (ring-buffer size).
_LEAD_SD_CAP = 6.0

#: Per-item output columns of :meth:`SimulationResult.frame`.
SIMULATION_COLUMNS: tuple[str, ...] = (
    "cycle_service",
    "cycle_service_low",
    "cycle_service_high",
    "fill_rate",
    "fill_rate_low",
    "fill_rate_high",
    "cycles",
    "average_on_hand",
    "orders_per_year",
    "units_short_per_year",
    "units_lost_per_year",
    "annual_ordering_cost",
    "annual_holding_cost",
    "annual_shortage_cost",
    "annual_total_cost",
)

# A demand sampler gives, for period t, the two parts (before / after the arrival point)
# of every (item, replication) demand; shaped (items, replications).
_Sampler = Callable[[int], tuple[np.ndarray, np.ndarray]]


def service_check(
    promised: ArrayLike, low: ArrayLike, high: ArrayLike, margin: float = 0.0
) -> np.ndarray:
    """-1 where the simulated band lies below the promise, +1 above it, 0 where it holds it.

    The promise must fall outside the band by more than ``margin`` as well (a floor on
    what is worth a warning). NaN anywhere gives 0: nothing to say.
    """
    pr, lo, hi = (np.asarray(x, dtype=float) for x in (promised, low, high))
    with np.errstate(invalid="ignore"):
        below = (hi < pr) & (pr - hi > margin)
        above = (lo > pr) & (lo - pr > margin)
    return np.where(below, -1, np.where(above, 1, 0)).astype(np.int64)


def history_band(
    columns: dict[str, np.ndarray], span: ArrayLike, lead_time_periods: ArrayLike
) -> dict[str, np.ndarray]:
    """The bands of a simulation on resamples, widened for the length of the history.

    Resampling cannot know more than the history holds: about n = span / lead time separate
    lead times, so the share of them that run short is itself uncertain by
    sqrt(p (1 - p) / n) with p = 1 - cycle service (binomial; common practice). The cycle
    service band becomes the estimate +- 1.96 x (simulation error and that error
    combined); the fill rate's simulation error is scaled up in the same proportion. Where
    no simulated cycle ran short at all, the low ends are at most 1 - 3 / n, the "rule of
    three" bound for no event in n trials (Hanley & Lippman-Hand 1983, from memory; it is
    the exact binomial 95 % bound, 1 - 0.05^(1/n), to within 10 % for n of 20 or more).
    Returns the four band columns; the promise is doubted only where even they exclude it.
    """
    c = columns
    n_w = np.maximum(np.asarray(span, dtype=float), 1.0) / np.maximum(
        np.asarray(lead_time_periods, dtype=float), 1.0
    )
    out: dict[str, np.ndarray] = {}
    with np.errstate(all="ignore"):
        cs = c["cycle_service"]
        se_cs = (c["cycle_service_high"] - c["cycle_service_low"]) / (2.0 * Z_BAND)
        p = np.clip(1.0 - cs, 0.0, 1.0)
        se_hist = np.sqrt(p * (1.0 - p) / n_w)
        grow = np.where(se_cs > 0, np.sqrt(1.0 + (se_hist / se_cs) ** 2), 1.0)
        none_short = cs >= 1.0 - 1e-12
        for key in ("cycle_service", "fill_rate"):
            est = c[key]
            half = (c[f"{key}_high"] - c[f"{key}_low"]) / 2.0 * grow
            low = est - half
            low = np.where(none_short | (est >= 1.0 - 1e-12), np.minimum(low, 1.0 - 3.0 / n_w), low)
            out[f"{key}_low"] = np.clip(low, 0.0, 1.0)
            out[f"{key}_high"] = np.clip(est + half, 0.0, 1.0)
    return out


def _rounding_variance(v: np.ndarray) -> np.ndarray:
    """E[phi (1 - phi)], phi the fractional part of e ~ N(0, v): the variance that random
    rounding of floor(L) + e to a whole number adds.

    From the Fourier series phi (1 - phi) = 1/6 - sum_k cos(2 pi k phi) / (pi k)^2 and
    E[cos(2 pi k e)] = exp(-2 pi^2 k^2 v) (the normal characteristic function): 1/6 -
    sum_k exp(-2 pi^2 k^2 v) / (pi k)^2, 0 at v = 0, rising to 1/6 (uniform phi).
    """
    k = np.arange(1, 201, dtype=float)
    v = np.asarray(v, dtype=float)[..., None]
    terms = np.exp(-2.0 * np.pi**2 * k * k * v) / (np.pi * k) ** 2
    return np.clip(1.0 / 6.0 - terms.sum(axis=-1), 0.0, 1.0 / 6.0)


def lead_draw_variance(target: ArrayLike) -> np.ndarray:
    """The variance v to draw lead times with, so that after random rounding to whole
    periods their variance is ``target``: the root of v + E[phi (1 - phi)](v) = target
    (bisection; the left side rises from 0), with the rounding variance of a normal
    spread (:func:`_rounding_variance`) standing in for the gamma's."""
    t = np.maximum(np.asarray(target, dtype=float), 0.0)
    lo, hi = np.zeros_like(t), t.copy()
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        above = mid + _rounding_variance(mid) > t
        hi = np.where(above, mid, hi)
        lo = np.where(above, lo, mid)
    return 0.5 * (lo + hi)


def block_length(lead_time_periods: ArrayLike, span: ArrayLike) -> np.ndarray:
    """Block length for the bootstrap: the longer of n^(1/3) and twice (lead time + 1).

    n^(1/3) is the usual order for block bootstraps of sums (Hall, Horowitz & Jing 1995,
    from memory); twice the lead time plus a period keeps runs of demand that make up a
    lead time together, so autocorrelation over the lead time survives the resampling
    (our rule). Capped at the span, at least 1.
    """
    lt = np.asarray(lead_time_periods, dtype=float)
    n = np.asarray(span, dtype=float)
    with np.errstate(invalid="ignore"):
        ell = np.maximum(np.ceil(2.0 * (np.nan_to_num(lt) + 1.0)), np.round(np.cbrt(n)))
        return np.clip(ell, 1.0, np.maximum(n, 1.0)).astype(np.int64)


def part_splitter(
    frac: np.ndarray,
    model: ArrayLike | None,
    mean: ArrayLike,
    sd: ArrayLike,
    rng: np.random.Generator,
) -> Callable[[np.ndarray], np.ndarray]:
    """A function giving, from whole periods' demand D (items x replications), the first
    part's demand: the share frac (per item) of the period, drawn from the law of that part
    given D under the item's demand model.

    Each law gives the part the mean f d and the variance f s^2 (f = frac, d and s the
    period's mean and sd) for any D with that mean and sd, as f of a period of independent
    demand has (the lead-time model's L s^2). With E[D] = d, Var D = s^2:

    * normal, a = f D + sqrt(f (1 - f)) s Z: Var a = f^2 s^2 + f (1 - f) s^2 = f s^2.
    * Poisson, a ~ Binomial(D, f): Var a = f (1 - f) d + f^2 s^2, which is f s^2 where
      s^2 = d, as the Poisson model says.
    * negative binomial, a ~ Binomial(D, P), P ~ Beta(r f, r (1 - f)):
      Var a = f (1 - f) (r d + s^2 + d^2) / (r + 1) + f^2 s^2, which is f s^2 for the
      model's r = d^2 / (s^2 - d). Where s^2 <= d it is split as Poisson.
    * gamma and any other model, a = W D, W ~ Beta(k f, k (1 - f)):
      Var a = (s^2 + d^2) f (k f + 1) / (k + 1) - f^2 d^2, which is f s^2 for k = d^2 / s^2.

    Counts split binomially take the whole units of D at or above 0; a fraction left over (a
    quantity that is not whole, or a return) is split evenly. Where the spread is unknown
    or zero, or the model is "even", the split is even (a = f D): the part then has the
    variance f^2 s^2, too little, which this function exists to avoid; "even" is kept so
    the difference can be shown.
    """
    fr = np.asarray(frac, dtype=float)
    n = fr.shape[0]
    names = (
        np.full(n, "gamma")
        if model is None
        else np.char.lower(np.char.strip(np.asarray(model, dtype=str)))
    )
    d = np.nan_to_num(np.broadcast_to(np.asarray(mean, dtype=float), (n,)))
    s = np.nan_to_num(np.broadcast_to(np.asarray(sd, dtype=float), (n,)))
    var = s * s
    on = (fr > 0) & (fr < 1) & (s > 0) & (names != "even")
    normal = on & (names == "normal")
    nb = on & (names == "negative binomial") & (var > d) & (d > 0)
    pois = on & ((names == "poisson") | (names == "negative binomial")) & ~nb
    gam = on & ~(normal | nb | pois) & (d > 0)
    k_n, k_p, k_nb, k_g = (np.flatnonzero(g) for g in (normal, pois, nb, gam))
    f_col = fr[:, None]
    with np.errstate(all="ignore"):
        bridge = np.sqrt(fr * (1.0 - fr)) * s
        r_nb = np.where(nb, d * d / np.where(nb, var - d, 1.0), 1.0)
        k_gam = np.where(gam, d * d / np.where(gam, var, 1.0), 1.0)

    def binomial(dd: np.ndarray, p: np.ndarray) -> np.ndarray:
        whole = np.floor(np.maximum(dd, 0.0))
        return rng.binomial(whole.astype(np.int64), p) + p * (dd - whole)

    def split(dd: np.ndarray) -> np.ndarray:
        a = f_col * dd
        reps = dd.shape[1]
        if k_n.size:
            a[k_n] += bridge[k_n][:, None] * rng.standard_normal((k_n.size, reps))
        if k_p.size:
            p = np.broadcast_to(f_col[k_p], (k_p.size, reps))
            a[k_p] = binomial(dd[k_p], p)
        if k_nb.size:
            r_ = r_nb[k_nb][:, None]
            f_ = f_col[k_nb]
            p = rng.beta(r_ * f_, r_ * (1.0 - f_), (k_nb.size, reps))
            a[k_nb] = binomial(dd[k_nb], p)
        if k_g.size:
            k_ = k_gam[k_g][:, None]
            f_ = f_col[k_g]
            a[k_g] = rng.beta(k_ * f_, k_ * (1.0 - f_), (k_g.size, reps)) * dd[k_g]
        return a

    return split


def _span_moments(matrix: np.ndarray, start: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each item's mean and sd per period over its span (start column to the end)."""
    m = np.nan_to_num(np.asarray(matrix, dtype=float))
    cols = np.arange(m.shape[1])[None, :]
    inside = cols >= np.asarray(start, np.int64)[:, None]
    n = np.maximum(inside.sum(axis=1), 1)
    mu = np.where(inside, m, 0.0).sum(axis=1) / n
    dev = np.where(inside, m - mu[:, None], 0.0)
    return mu, np.sqrt((dev * dev).sum(axis=1) / np.maximum(n - 1, 1))


def _split_for(
    src: HistoryReplay | BlockBootstrap, frac: np.ndarray, rng: np.random.Generator
) -> Callable[[np.ndarray], np.ndarray]:
    if src.mean is None or src.sd is None:
        mu, sd = _span_moments(src.matrix, src.start)
    else:
        mu, sd = src.mean, src.sd
    return part_splitter(frac, src.model, mu, sd, rng)


def _take_split(
    src: HistoryReplay | BlockBootstrap, idx: np.ndarray
) -> tuple[np.ndarray | None, np.ndarray | None, np.ndarray | None]:
    """The split's model, mean and sd of the items idx (None stays None)."""
    return tuple(  # type: ignore[return-value]
        None if x is None else np.asarray(x)[idx] for x in (src.model, src.mean, src.sd)
    )


@dataclass
class HistoryReplay:
    """The item's own history played once, from its start column to the last column.

    matrix: items x periods (NaN counts as no demand); start: first column per item.
    """

    matrix: np.ndarray
    start: np.ndarray
    model: np.ndarray | None = None
    mean: np.ndarray | None = None
    sd: np.ndarray | None = None

    replay = True

    def take(self, idx: np.ndarray) -> HistoryReplay:
        return HistoryReplay(
            np.asarray(self.matrix, float)[idx],
            np.asarray(self.start, np.int64)[idx],
            *_take_split(self, idx),
        )

    def periods(self) -> int:
        return int(np.asarray(self.matrix).shape[1])

    def sampler(self, reps: int, frac: np.ndarray, rng: np.random.Generator) -> _Sampler:
        m = np.nan_to_num(np.asarray(self.matrix, dtype=float))
        st = np.asarray(self.start, np.int64)
        split = _split_for(self, frac, rng)

        def draw(t: int) -> tuple[np.ndarray, np.ndarray]:
            d = np.where(t >= st, m[:, t], 0.0)[:, None] * np.ones((1, reps))
            a = split(d)
            return a, d - a

        return draw


@dataclass
class BlockBootstrap:
    """Circular block bootstrap of each item's history span (Politis & Romano 1992).

    Each replication is a fresh series: blocks of ``block`` consecutive periods, each
    starting at a random period of the span, wrapping round its end (circular), so runs and
    short-term patterns of demand survive. block: per item (see :func:`block_length`);
    NaN cells count as no demand.
    """

    matrix: np.ndarray
    start: np.ndarray
    block: np.ndarray
    length: int
    model: np.ndarray | None = None
    mean: np.ndarray | None = None
    sd: np.ndarray | None = None

    replay = False

    def take(self, idx: np.ndarray) -> BlockBootstrap:
        return BlockBootstrap(
            np.asarray(self.matrix, float)[idx],
            np.asarray(self.start, np.int64)[idx],
            np.asarray(self.block, np.int64)[idx],
            self.length,
            *_take_split(self, idx),
        )

    def periods(self) -> int:
        return int(self.length)

    def sampler(self, reps: int, frac: np.ndarray, rng: np.random.Generator) -> _Sampler:
        m = np.nan_to_num(np.asarray(self.matrix, dtype=float))
        n_items, n_cols = m.shape
        flat = m.ravel()
        st = np.asarray(self.start, np.int64)
        span = np.maximum(n_cols - st, 1)
        base = (np.arange(n_items, dtype=np.int64) * n_cols + np.minimum(st, n_cols - 1))[:, None]
        ell = np.maximum(np.asarray(self.block, np.int64), 1)
        split = _split_for(self, frac, rng)
        pos = np.zeros((n_items, reps), dtype=np.int64)  # place in the span, per cell
        span_c = span[:, None]

        def draw(t: int) -> tuple[np.ndarray, np.ndarray]:
            # the next period of the current block, wrapping round the span's end ...
            pos[...] += 1
            pos[...] -= np.where(pos >= span_c, span_c, 0)
            # ... or, where a block ends, the first period of a new one, at random
            new = np.flatnonzero(t % ell == 0)
            if new.size:
                pos[new] = (rng.random((new.size, reps)) * span_c[new]).astype(np.int64)
            d = flat[base + pos]
            a = split(d)
            return a, d - a

        return draw


@dataclass
class ModelDraws:
    """Per-period demand drawn from the item's model: the per-period counterpart of its
    lead-time demand model, matching the per-period mean and sd.

    model: "normal", "poisson", "negative binomial" (Poisson where sd^2 <= mean) or
    "gamma" per item; mean, sd: demand per period.
    """

    model: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    length: int

    replay = False

    def take(self, idx: np.ndarray) -> ModelDraws:
        return ModelDraws(
            np.asarray(self.model, object)[idx],
            np.asarray(self.mean, float)[idx],
            np.asarray(self.sd, float)[idx],
            self.length,
        )

    def periods(self) -> int:
        return int(self.length)

    def sampler(self, reps: int, frac: np.ndarray, rng: np.random.Generator) -> _Sampler:
        names = np.char.lower(np.char.strip(np.asarray(self.model, dtype=str)))
        d = np.nan_to_num(np.asarray(self.mean, float))
        s = np.nan_to_num(np.asarray(self.sd, float))
        n = d.shape[0]
        var = s * s
        nb = (names == "negative binomial") & (var > d) & (d > 0)
        pois = (names == "poisson") | ((names == "negative binomial") & ~nb)
        gam = (names == "gamma") & (d > 0) & (s > 0)
        gam_point = (names == "gamma") & ~gam
        normal = ~(nb | pois | gam | gam_point)
        groups = [np.flatnonzero(g) for g in (normal, pois, nb, gam, gam_point)]
        with np.errstate(all="ignore"):
            nb_r = np.where(nb, d * d / (var - d), 1.0)
            nb_p = np.where(nb, d / np.where(nb, var, 1.0), 0.5)
            g_k = np.where(gam, d * d / np.where(gam, var, 1.0), 1.0)
            g_th = np.where(gam, var / np.where(gam, d, 1.0), 1.0)

        def part(share: np.ndarray) -> np.ndarray:
            out = np.zeros((n, reps))
            on = share > 0
            k_n, k_p, k_nb, k_g, k_gp = groups
            if k_n.size:
                sh = share[k_n][:, None]
                out[k_n] = rng.normal(
                    d[k_n][:, None] * sh, s[k_n][:, None] * np.sqrt(sh), (k_n.size, reps)
                )
            if k_p.size:
                out[k_p] = rng.poisson((d[k_p] * share[k_p])[:, None], (k_p.size, reps))
            if k_nb.size:
                sh = np.where(on[k_nb], share[k_nb], 1.0)[:, None]
                x: np.ndarray = rng.negative_binomial(
                    nb_r[k_nb][:, None] * sh, nb_p[k_nb][:, None], (k_nb.size, reps)
                )
                out[k_nb] = np.where(on[k_nb][:, None], x, 0.0)
            if k_g.size:
                sh = np.where(on[k_g], share[k_g], 1.0)[:, None]
                x = rng.gamma(g_k[k_g][:, None] * sh, g_th[k_g][:, None], (k_g.size, reps))
                out[k_g] = np.where(on[k_g][:, None], x, 0.0)
            if k_gp.size:
                out[k_gp] = (d[k_gp] * share[k_gp])[:, None]
            return out

        def draw(t: int) -> tuple[np.ndarray, np.ndarray]:
            return part(frac), part(1.0 - frac)

        return draw


DemandSource = HistoryReplay | BlockBootstrap | ModelDraws


@dataclass
class SimulationResult:
    """Per-item figures of a back-test (1-D arrays over items) and the run's totals.

    The ``total_*`` arrays (summed over replications, whole run, warm-up included) are for
    checking that units are conserved: start + received - demand = end net stock (+ lost),
    and ordered = received + still on order.
    """

    columns: dict[str, np.ndarray]
    totals: dict[str, np.ndarray] = field(default_factory=dict)
    trace: dict[str, np.ndarray] = field(default_factory=dict)

    def __getattr__(self, name: str) -> np.ndarray:
        cols = self.__dict__.get("columns", {})
        if name in cols:
            return cols[name]
        raise AttributeError(name)

    def frame(self) -> pd.DataFrame:
        """The per-item columns (SIMULATION_COLUMNS) as a DataFrame."""
        return pd.DataFrame({k: self.columns[k] for k in SIMULATION_COLUMNS})


def _ratio_band(num: np.ndarray, den: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pooled ratio sum(num)/sum(den) over replications (axis 1) and its 95 % band.

    Delta-method standard error of a ratio estimator over independent replications; with
    one replication, a Wilson score interval treating den as trials.
    """
    m = num.shape[1]
    s_num, s_den = num.sum(axis=1), den.sum(axis=1)
    with np.errstate(all="ignore"):
        p = np.where(s_den > 0, s_num / s_den, np.nan)
        if m >= 2:
            dev = num - p[:, None] * den
            se = np.sqrt((dev * dev).sum(axis=1) / (m * (m - 1))) / (s_den / m)
            lo, hi = p - Z_BAND * se, p + Z_BAND * se
        else:
            z2 = Z_BAND * Z_BAND
            centre = (p + z2 / (2 * s_den)) / (1 + z2 / s_den)
            half = (
                Z_BAND * np.sqrt(p * (1 - p) / s_den + z2 / (4 * s_den * s_den)) / (1 + z2 / s_den)
            )
            lo, hi = centre - half, centre + half
    return p, lo, hi


def simulate_policy(
    order_qty: ArrayLike,
    reorder_point: ArrayLike,
    lead_time_periods: ArrayLike,
    lead_time_sd_periods: ArrayLike,
    demand: DemandSource,
    *,
    replications: int = 200,
    seed: int | np.random.Generator | None = 0,
    lost_sales: bool = False,
    periods_per_year: float = 52.0,
    order_cost: ArrayLike = 0.0,
    holding_cost: ArrayLike = 0.0,
    shortage_cost: ArrayLike = np.nan,
    trace_items: ArrayLike | None = None,
) -> SimulationResult:
    """Simulate (Q, R) for every item on the demand source; per-item service, stock and cost.

    Items with a missing or non-positive Q, a missing R or lead time get NaN. A replay runs
    once per item whatever ``replications`` says. ``trace_items``: indices of items whose
    first replication's stock path is returned in ``trace`` (net stock, position, orders per
    period: net stock is on hand minus backordered), for a chart. See the module docstring
    for the method.
    """
    q = np.asarray(order_qty, dtype=float).reshape(-1)
    n = q.shape[0]

    def col(x: ArrayLike) -> np.ndarray:
        return np.broadcast_to(np.asarray(x, dtype=float), (n,)).copy()

    r, lt, lsd = col(reorder_point), col(lead_time_periods), col(lead_time_sd_periods)
    S, H, p = col(order_cost), col(holding_cost), col(shortage_cost)
    lsd = np.where(np.isfinite(lsd) & (lsd > 0), lsd, 0.0)
    ok = np.isfinite(q) & (q > 0) & np.isfinite(r) & np.isfinite(lt) & (lt >= 0)
    reps = 1 if demand.replay else max(int(replications), 1)
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)

    out = {k: np.full(n, np.nan) for k in SIMULATION_COLUMNS}
    totals = {
        k: np.full(n, np.nan)
        for k in ("start", "demand", "ordered", "received", "end_net", "end_pipeline", "lost")
    }
    trace_idx = np.asarray([] if trace_items is None else trace_items, dtype=np.int64)
    trace: dict[str, np.ndarray] = {}
    T = demand.periods()
    if trace_idx.size:
        trace = {
            "item": trace_idx,
            **{
                k: np.full((trace_idx.size, T), np.nan)
                for k in ("net_stock", "position", "ordered", "demand")
            },
        }
    good = np.flatnonzero(ok)
    chunk = max(1, _CHUNK_CELLS // reps)
    for c0 in range(0, good.size, chunk):
        idx = good[c0 : c0 + chunk]
        tr_local = np.flatnonzero(np.isin(idx, trace_idx))
        res, tot, tr = _run(
            q[idx],
            r[idx],
            lt[idx],
            lsd[idx],
            demand.take(idx),
            reps,
            rng,
            lost_sales,
            periods_per_year,
            tr_local,
        )
        for k, v in res.items():
            out[k][idx] = v
        for k, v in tot.items():
            totals[k][idx] = v
        for j, loc in enumerate(tr_local):
            row = int(np.flatnonzero(trace_idx == idx[loc])[0])
            for k in ("net_stock", "position", "ordered", "demand"):
                trace[k][row] = tr[k][j]
    with np.errstate(all="ignore"):
        out["annual_ordering_cost"] = out["orders_per_year"] * S
        out["annual_holding_cost"] = out["average_on_hand"] * H
        pen = np.where(np.isfinite(p), p, 0.0)
        out["annual_shortage_cost"] = np.where(
            np.isfinite(out["units_short_per_year"]),
            (out["units_short_per_year"] + np.nan_to_num(out["units_lost_per_year"])) * pen
            if lost_sales
            else out["units_short_per_year"] * pen,
            np.nan,
        )
        out["annual_total_cost"] = (
            out["annual_ordering_cost"] + out["annual_holding_cost"] + out["annual_shortage_cost"]
        )
    return SimulationResult(out, totals, trace)


def _run(
    Q: np.ndarray,
    R: np.ndarray,
    L: np.ndarray,
    Lsd: np.ndarray,
    src: DemandSource,
    reps: int,
    rng: np.random.Generator,
    lost: bool,
    ppy: float,
    trace_rows: np.ndarray,
) -> tuple[dict[str, np.ndarray], dict[str, np.ndarray], dict[str, np.ndarray]]:
    """The time loop for one chunk of items, all replications at once.

    State is kept per cell (item x replication, flattened); orders and arrivals touch only
    the cells that have one.
    """
    n = Q.shape[0]
    C = n * reps
    T = src.periods()
    whole = np.floor(L + 1e-9)
    frac = np.clip(L - whole, 0.0, 1.0)
    frac = np.where(frac < 1e-9, 0.0, frac)
    k_cap = np.ceil(L + _LEAD_SD_CAP * Lsd) + 1.0
    W = int(k_cap.max()) + 3
    warm = np.ceil(L + 2.0 * Lsd) + 1.0
    begin = np.asarray(src.start, dtype=float) if isinstance(src, HistoryReplay) else np.zeros(n)
    random_lt = (Lsd > 0) & (L > 0)
    v_draw = lead_draw_variance(Lsd * Lsd)
    with np.errstate(all="ignore"):
        g_shape = np.where(random_lt, L * L / np.where(random_lt, v_draw, 1.0), 1.0)
        g_scale = np.where(random_lt, v_draw / np.where(L > 0, L, 1.0), 1.0)

    def cells(x: np.ndarray) -> np.ndarray:
        return np.repeat(np.asarray(x, dtype=float), reps)

    Qc, Rc, fc, wc, kc = cells(Q), cells(R), cells(frac), cells(whole), cells(k_cap)
    any_frac = bool((frac > 0).any())
    half_f, half_g = 0.5 * fc, 0.5 * (1.0 - fc)
    count_from = cells(begin + warm)
    count_all = float(count_from.max()) if C else 0.0
    rand_c = np.repeat(random_lt, reps)
    gk, gs = cells(g_shape), cells(g_scale)
    begin_c = cells(begin)

    stock = Rc + Qc if src.replay else Rc + rng.random(C) * Qc
    start_stock = stock.copy()  # net stock (backorders) or on hand (lost sales)
    pipe = np.zeros(C)
    pq = np.zeros((W, C))  # quantity due, by arrival slot
    pu = np.zeros((W, C))  # undershoot below R when the order was placed
    pcum = np.zeros((W, C))  # cumulative demand (or units lost) at placement
    pc = np.zeros((W, C), dtype=bool)  # an order is due
    pflag = np.zeros((W, C), dtype=bool)  # ... placed after the warm-up
    cum = np.zeros(C)
    acc = {
        k: np.zeros(C)
        for k in (
            "cycles",
            "stockouts",
            "short",
            "qty_in",
            "on_hand",
            "orders",
            "lost",
            "lost_all",
            "demand",
            "ordered",
            "received",
        )
    }
    periods_counted = np.zeros(n)
    sample = src.sampler(reps, frac, rng)
    trace_cells = trace_rows * reps
    tr = {
        k: np.full((trace_rows.size, T), np.nan)
        for k in ("net_stock", "position", "ordered", "demand")
    }

    for t in range(T):
        a2, b2 = sample(t)
        a, b = a2.reshape(-1), b2.reshape(-1)
        counting = t >= count_from
        slot = t % W
        oh0 = np.maximum(stock, 0.0) if any_frac else None
        # -- first part of the period's demand ------------------------------------------
        if lost:
            need = np.maximum(a, 0.0)
            served = np.minimum(stock, need)
            lost_a = need - served
            stock = stock - served - np.minimum(a, 0.0)
            cum += lost_a
        else:
            lost_a = 0.0
            np.subtract(stock, a, out=stock)
            cum += a
        before = np.maximum(stock, 0.0)
        # -- arrival ---------------------------------------------------------------------
        due = np.flatnonzero(pc[slot])
        if due.size:
            u, pcm, qd = pu[slot, due], pcum[slot, due], pq[slot, due]
            if lost:
                s_i = np.maximum(cum[due] - pcm - u, 0.0)
                out_i = s_i > 0
            else:
                x = stock[due] + u
                s_i = np.minimum(np.maximum(-x, 0.0), cum[due] - pcm)
                out_i = x < 0
            use = pflag[slot, due]
            acc["cycles"][due] += use
            acc["stockouts"][due] += use & out_i
            acc["short"][due] += np.where(use, s_i, 0.0)
            acc["qty_in"][due] += np.where(use, qd, 0.0)
            stock[due] += qd
            pipe[due] -= qd
            acc["received"][due] += qd
            pq[slot, due] = 0.0
            pc[slot, due] = False
            pflag[slot, due] = False
            after = np.maximum(stock, 0.0)
        else:
            after = before
        # -- rest of the period -----------------------------------------------------------
        if lost:
            need = np.maximum(b, 0.0)
            served = np.minimum(stock, need)
            lost_t = lost_a + need - served
            stock = stock - served - np.minimum(b, 0.0)
            cum += need - served
        else:
            np.subtract(stock, b, out=stock)
            cum += b
            lost_t = 0.0
        oh1 = np.maximum(stock, 0.0)
        if lost:  # with backorders, cum is the demand so far
            acc["demand"] += a
            acc["demand"] += b
            acc["lost_all"] += lost_t
        # on hand averaged over the period: trapezoids before and after the arrival point
        if any_frac:
            avg_oh = half_f * (oh0 + before) + half_g * (after + oh1)
        else:
            avg_oh = 0.5 * (after + oh1)
        if t >= count_all:
            acc["on_hand"] += avg_oh
            if lost:
                acc["lost"] += lost_t
        else:
            acc["on_hand"] += np.where(counting, avg_oh, 0.0)
            if lost:
                acc["lost"] += np.where(counting, lost_t, 0.0)
        periods_counted += t >= begin + warm
        # -- review at the end of the period ----------------------------------------------
        ip = stock + pipe
        order = ip <= Rc
        if src.replay:
            order &= t >= begin_c
        o = np.flatnonzero(order)
        qty_o = np.zeros(0)
        if o.size:
            k = np.floor((Rc[o] - ip[o]) / Qc[o]) + 1.0
            qty_o = k * Qc[o]
            lead = wc[o]
            if rand_c.any():
                ro = rand_c[o]
                if ro.any():
                    idx = o[ro]
                    x = rng.gamma(gk[idx], gs[idx])
                    jw = np.maximum(x - fc[idx], 0.0)
                    lead = lead.copy()
                    lead[ro] = np.floor(jw + rng.random(idx.size))
            lead = np.minimum(lead, kc[o])
            s2 = ((t + 1 + lead) % W).astype(np.int64)
            taken = pc[s2, o]
            fresh = ~taken
            pq[s2, o] += qty_o
            pu[s2, o] = np.where(fresh, Rc[o] - ip[o], pu[s2, o])
            pcum[s2, o] = np.where(fresh, cum[o], pcum[s2, o])
            pflag[s2, o] = np.where(fresh, counting[o], pflag[s2, o])
            pc[s2, o] = True
            pipe[o] += qty_o
            acc["orders"][o] += counting[o]
            acc["ordered"][o] += qty_o
        if trace_cells.size:
            qty_full = np.zeros(C)
            qty_full[o] = qty_o
            tr["net_stock"][:, t] = stock[trace_cells]
            tr["position"][:, t] = (stock + pipe)[trace_cells]
            tr["ordered"][:, t] = qty_full[trace_cells]
            tr["demand"][:, t] = (a + b)[trace_cells]

    if not lost:
        acc["demand"] = cum
    g = {k: v.reshape(n, reps) for k, v in acc.items()}
    cs, cs_lo, cs_hi = _ratio_band(g["cycles"] - g["stockouts"], g["cycles"])
    sh, sh_lo, sh_hi = _ratio_band(g["short"], g["qty_in"])
    per = periods_counted * reps
    with np.errstate(all="ignore"):
        years = per / ppy
        res = {
            "cycle_service": cs,
            "cycle_service_low": np.clip(cs_lo, 0, 1),
            "cycle_service_high": np.clip(cs_hi, 0, 1),
            "fill_rate": np.clip(1.0 - sh, 0.0, 1.0),
            "fill_rate_low": np.clip(1.0 - sh_hi, 0.0, 1.0),
            "fill_rate_high": np.clip(1.0 - sh_lo, 0.0, 1.0),
            "cycles": g["cycles"].sum(axis=1),
            "average_on_hand": np.where(per > 0, g["on_hand"].sum(axis=1) / per, np.nan),
            "orders_per_year": np.where(per > 0, g["orders"].sum(axis=1) / years, np.nan),
            "units_short_per_year": np.where(per > 0, g["short"].sum(axis=1) / years, np.nan),
            "units_lost_per_year": (
                np.where(per > 0, g["lost"].sum(axis=1) / years, np.nan) if lost else np.zeros(n)
            ),
        }
    for k in (
        "annual_ordering_cost",
        "annual_holding_cost",
        "annual_shortage_cost",
        "annual_total_cost",
    ):
        res[k] = np.full(n, np.nan)
    tot = {
        "start": start_stock.reshape(n, reps).sum(axis=1),
        "demand": g["demand"].sum(axis=1),
        "ordered": g["ordered"].sum(axis=1),
        "received": g["received"].sum(axis=1),
        "end_net": stock.reshape(n, reps).sum(axis=1),
        "end_pipeline": pipe.reshape(n, reps).sum(axis=1),
        "lost": g["lost_all"].sum(axis=1),
    }
    return res, tot, tr
