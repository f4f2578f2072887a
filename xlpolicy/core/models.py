"""Lead-time demand models: the distribution of demand over one replenishment lead time.

The policy code talks to a model only through :class:`LeadTimeDemandModel`. Four models
are here, each built from the mean and sd of lead-time demand: normal, Poisson (slow
movers), negative binomial (over-dispersed counts) and gamma (skewed, continuous), each
matched to that mean and, where it has a second parameter, that sd (Axsäter, "Inventory
Control", 3rd ed. 2015, ch. 5 for Poisson lead-time demand). Every method works on whole
columns at once (numpy arrays, broadcast against the model's own arrays); missing or invalid
parameters give NaN, never a warning or an exception.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Callable
from typing import ClassVar

import numpy as np
from numpy.typing import ArrayLike
from scipy import stats
from scipy.special import erfcx, ndtr, ndtri

__all__ = [
    "LeadTimeDemandModel",
    "NormalLeadTimeDemand",
    "PoissonLeadTimeDemand",
    "NegativeBinomialLeadTimeDemand",
    "GammaLeadTimeDemand",
    "MODEL_NAMES",
    "model_factory",
    "normal_loss",
    "inverse_normal_loss",
    "Z_LIMIT",
]

#: The standard normal loss function is solved over z in [-Z_LIMIT, Z_LIMIT]; beyond
#: -Z_LIMIT it equals -z to double precision, beyond +Z_LIMIT it underflows to 0.
Z_LIMIT = 40.0

_INV_SQRT_2PI = 1.0 / np.sqrt(2.0 * np.pi)
_SQRT_HALF = np.sqrt(0.5)
_BISECTION_STEPS = 64  # 80 / 2**64 is far below double spacing at any z of interest
_STEP_TOL = 1e-9  # relative tolerance for the deterministic (sd == 0) step


def normal_loss(z: ArrayLike) -> np.ndarray:
    """Standard normal loss function G(z) = E[(Z - z)^+] = phi(z) - z (1 - Phi(z)).

    Computed as exp(-z^2/2) (1/sqrt(2 pi) - z erfcx(z/sqrt 2)/2) for z >= 0, which avoids
    the cancellation of the textbook form in the upper tail, and through G(z) = G(-z) - z
    for z < 0. G(+inf) = 0, G(-inf) = +inf, NaN stays NaN.
    """
    z = np.asarray(z, dtype=float)
    with np.errstate(all="ignore"):
        a = np.abs(z)
        g_abs = np.exp(-0.5 * a * a) * (_INV_SQRT_2PI - 0.5 * a * erfcx(a * _SQRT_HALF))
        g_abs = np.where(np.isinf(a), 0.0, np.maximum(g_abs, 0.0))
        out = np.where(z >= 0, g_abs, g_abs - z)
        out = np.where(np.isnan(z), np.nan, out)
    return out


def inverse_normal_loss(g: ArrayLike) -> np.ndarray:
    """The z with G(z) = g, for g > 0 (vectorised bisection, no per-item loop).

    G is strictly decreasing, so the answer is unique. g >= Z_LIMIT gives z = -g (there
    G(z) = -z to double precision); g = 0 gives +inf (no finite z has zero loss);
    g < 0 or NaN gives NaN.
    """
    g = np.asarray(g, dtype=float)
    shape = g.shape
    g = g.reshape(-1)
    lo = np.full(g.shape, -Z_LIMIT)
    hi = np.full(g.shape, Z_LIMIT)
    # invariant: G(lo) >= g > G(hi) (or g beyond the bracket, handled below)
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (lo + hi)
        above = normal_loss(mid) > g
        lo = np.where(above, mid, lo)
        hi = np.where(above, hi, mid)
    z = 0.5 * (lo + hi)
    with np.errstate(all="ignore"):
        z = np.where(g >= Z_LIMIT, -g, z)
        z = np.where(g == 0.0, np.inf, z)
        z = np.where((g < 0.0) | np.isnan(g), np.nan, z)
    return z.reshape(shape)


class LeadTimeDemandModel(ABC):
    """Interface of a lead-time demand distribution, one per item, held as arrays.

    ``mean`` and ``sd`` are the lead-time demand mean and standard deviation, 1-D arrays
    of one length. Methods take an argument that broadcasts against them and return an
    array of the broadcast shape. ``name`` is the label written to the output.
    """

    name: ClassVar[str]
    #: True where the model's demand is whole units (its reorder points are whole anyway).
    discrete: ClassVar[bool] = False
    mean: np.ndarray
    sd: np.ndarray

    @abstractmethod
    def __init__(self, mean: ArrayLike, sd: ArrayLike) -> None:
        """A model per item from its lead-time demand mean and standard deviation."""

    def item_model_names(self) -> np.ndarray:
        """The model name used for each item (a model may fall back to another per item)."""
        return np.full(np.shape(self.mean), self.name, dtype=object)

    @abstractmethod
    def cdf(self, r: ArrayLike) -> np.ndarray:
        """P(X <= r)."""

    @abstractmethod
    def sf(self, r: ArrayLike) -> np.ndarray:
        """P(X > r), accurate in the upper tail."""

    @abstractmethod
    def quantile(self, p: ArrayLike) -> np.ndarray:
        """Smallest r with P(X <= r) >= p (continuous models: the inverse cdf)."""

    @abstractmethod
    def upper_quantile(self, tail: ArrayLike) -> np.ndarray:
        """r with P(X > r) = tail, accurate for tiny tails (the inverse survival function)."""

    @abstractmethod
    def expected_shortage(self, r: ArrayLike) -> np.ndarray:
        """E[(X - r)^+]: expected units short per cycle when reordering at r."""

    @abstractmethod
    def min_r_for_shortage(self, target_units: ArrayLike) -> np.ndarray:
        """Smallest continuous r with expected_shortage(r) <= target_units."""


class NormalLeadTimeDemand(LeadTimeDemandModel):
    """Normal lead-time demand N(mean, sd^2); sd == 0 means demand is known exactly.

    With sd == 0 the cdf is a step at the mean (with a relative tolerance of 1e-9 against
    float noise in mean = d * L), the quantile is the mean and the expected shortage is
    max(mean - r, 0). A negative or NaN sd, or a NaN mean, gives NaN results.
    """

    name: ClassVar[str] = "normal"
    discrete: ClassVar[bool] = False

    def __init__(self, mean: ArrayLike, sd: ArrayLike) -> None:
        mean_a, sd_a = np.broadcast_arrays(
            np.asarray(mean, dtype=float), np.asarray(sd, dtype=float)
        )
        self.mean = np.array(mean_a, dtype=float)
        self.sd = np.array(sd_a, dtype=float)

    # -- helpers -----------------------------------------------------------------------
    def _parts(self, x: ArrayLike) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Broadcast x with (mean, sd); also return the mask of unusable parameters."""
        x_a = np.asarray(x, dtype=float)
        mean, sd, x_b = np.broadcast_arrays(self.mean, self.sd, x_a)
        with np.errstate(invalid="ignore"):
            bad = np.isnan(mean) | np.isnan(sd) | (sd < 0) | np.isinf(mean) | np.isinf(sd)
        return mean, sd, x_b, bad

    # -- interface ---------------------------------------------------------------------
    def cdf(self, r: ArrayLike) -> np.ndarray:
        """P(X <= r); a step at the mean where sd == 0."""
        mean, sd, r_b, bad = self._parts(r)
        with np.errstate(all="ignore"):
            smooth = ndtr((r_b - mean) / sd)
            step = (r_b >= mean - _STEP_TOL * np.maximum(1.0, np.abs(mean))).astype(float)
            out = np.where(sd == 0, step, smooth)
        return np.where(bad | np.isnan(r_b), np.nan, out)

    def sf(self, r: ArrayLike) -> np.ndarray:
        """P(X > r) = Phi((mean - r) / sd); a step at the mean where sd == 0."""
        mean, sd, r_b, bad = self._parts(r)
        with np.errstate(all="ignore"):
            smooth = ndtr((mean - r_b) / sd)
            step = (r_b < mean - _STEP_TOL * np.maximum(1.0, np.abs(mean))).astype(float)
            out = np.where(sd == 0, step, smooth)
        return np.where(bad | np.isnan(r_b), np.nan, out)

    def quantile(self, p: ArrayLike) -> np.ndarray:
        """mean + sd Phi^-1(p); the mean itself where sd == 0. p outside [0, 1]: NaN."""
        mean, sd, p_b, bad = self._parts(p)
        with np.errstate(all="ignore"):
            out = np.where(sd == 0, mean, mean + sd * ndtri(p_b))
            bad = bad | ~((p_b >= 0) & (p_b <= 1))
        return np.where(bad, np.nan, out)

    def upper_quantile(self, tail: ArrayLike) -> np.ndarray:
        """mean - sd Phi^-1(tail), the r with P(X > r) = tail; the mean where sd == 0."""
        mean, sd, t_b, bad = self._parts(tail)
        with np.errstate(all="ignore"):
            out = np.where(sd == 0, mean, mean - sd * ndtri(t_b))
            bad = bad | ~((t_b >= 0) & (t_b <= 1))
        return np.where(bad, np.nan, out)

    def expected_shortage(self, r: ArrayLike) -> np.ndarray:
        """E[(X - r)^+] = sd G((r - mean) / sd); max(mean - r, 0) where sd == 0."""
        mean, sd, r_b, bad = self._parts(r)
        with np.errstate(all="ignore"):
            smooth = sd * normal_loss((r_b - mean) / sd)
            step = np.maximum(mean - r_b, 0.0)
            out = np.where(sd == 0, step, smooth)
        return np.where(bad | np.isnan(r_b), np.nan, out)

    def min_r_for_shortage(self, target_units: ArrayLike) -> np.ndarray:
        """Smallest r with E[(X - r)^+] <= target_units.

        mean + sd G^-1(target / sd); mean - target where sd == 0. A target of 0 with
        sd > 0 gives +inf; a negative target gives NaN.
        """
        mean, sd, t_b, bad = self._parts(target_units)
        with np.errstate(all="ignore"):
            smooth = mean + sd * inverse_normal_loss(t_b / sd)
            step = mean - t_b
            out = np.where(sd == 0, step, smooth)
            bad = bad | np.isnan(t_b) | (t_b < 0)
        return np.where(bad, np.nan, out)


# ---------------------------------------------------------------------------------------
# Models for demand that is not normal: shared machinery
# ---------------------------------------------------------------------------------------

_SEARCH_STEPS = 64  # galloping and bisection rounds: 2**64 units is beyond any demand
_CONT_BISECTION_STEPS = 200  # continuous bisection: stops early once at double spacing


def _first_whole(pred: Callable[[np.ndarray], np.ndarray], guess: np.ndarray) -> np.ndarray:
    """Smallest whole k with pred(k), for a predicate that turns from False to True once.

    The caller guarantees pred(-1) is False. From the guess, gallop (steps 1, 2, 4, ...) to
    a bracket, then bisect on whole numbers; every item is independent of the others.
    Items where pred never holds (or is NaN) give +inf.
    """
    g = np.maximum(np.where(np.isfinite(guess), np.floor(guess), 0.0), 0.0)
    at = pred(g)
    hi = np.where(at, g, np.inf)  # pred(hi) is True
    lo = np.where(at, -np.inf, g)  # pred(lo) is False
    step = 1.0
    for _ in range(_SEARCH_STEPS):
        need_lo = ~np.isfinite(lo)
        need_hi = ~np.isfinite(hi)
        active = need_lo | need_hi
        if not active.any():
            break
        probe = np.where(need_lo, np.maximum(hi - step, -1.0), lo + step)
        probe = np.where(active, probe, 0.0)
        hit = pred(probe)
        hi = np.where(active & hit, probe, hi)
        # pred(-1) is False by contract; should float noise say otherwise, stop at -1
        lo = np.where(active & (~hit | (probe <= -1.0)), probe, lo)
        step *= 2.0
    for _ in range(_SEARCH_STEPS + 2):
        gap = hi - lo
        active = np.isfinite(gap) & (gap > 1.0)
        if not active.any():
            break
        mid = np.where(active, np.floor(0.5 * (lo + hi)), 0.0)
        hit = pred(mid)
        hi = np.where(active & hit, mid, hi)
        lo = np.where(active & ~hit, mid, lo)
    return np.where(np.isfinite(lo), hi, np.inf)


def _first_whole_at(
    pred: Callable[[np.ndarray, np.ndarray], np.ndarray], guess: np.ndarray
) -> np.ndarray:
    """:func:`_first_whole` for 1-D items, asking ``pred(k, j)`` only for the items j
    still searching (each round of the full version asks every item).

    Same steps as _first_whole, so the same answer for a predicate that turns from False
    to True once: gallop from the guess to a bracket, then bisect on whole numbers.
    """
    g = np.maximum(np.where(np.isfinite(guess), np.floor(guess), 0.0), 0.0)
    at = pred(g, np.arange(g.shape[0]))
    hi = np.where(at, g, np.inf)  # pred(hi) is True
    lo = np.where(at, -np.inf, g)  # pred(lo) is False
    step = 1.0
    for _ in range(_SEARCH_STEPS):
        j = np.flatnonzero(~np.isfinite(lo) | ~np.isfinite(hi))
        if not j.size:
            break
        need_lo = ~np.isfinite(lo[j])
        probe = np.where(need_lo, np.maximum(hi[j] - step, -1.0), lo[j] + step)
        hit = pred(probe, j)
        hi[j] = np.where(hit, probe, hi[j])
        lo[j] = np.where(~hit | (probe <= -1.0), probe, lo[j])
        step *= 2.0
    for _ in range(_SEARCH_STEPS + 2):
        gap = hi - lo
        j = np.flatnonzero(np.isfinite(gap) & (gap > 1.0))
        if not j.size:
            break
        mid = np.floor(0.5 * (lo[j] + hi[j]))
        hit = pred(mid, j)
        hi[j] = np.where(hit, mid, hi[j])
        lo[j] = np.where(~hit, mid, lo[j])
    return np.where(np.isfinite(lo), hi, np.inf)


class _NonNormalModel(LeadTimeDemandModel):
    """Common parts of the Poisson, negative binomial and gamma models.

    Subclasses set up safe distribution parameters (harmless values where an item's
    parameters are unusable or its distribution is a point mass) and provide the raw
    cdf, sf, expected shortage, quantile and inverse survival function; this class adds
    broadcasting, the point masses and NaN for unusable items. A point mass at the mean
    (model variance 0) behaves like the normal model with sd = 0.
    """

    #: safe distribution parameters, one array per parameter, each shaped like ``mean``
    _params: tuple[np.ndarray, ...]
    _bad: np.ndarray
    _point: np.ndarray

    def __init__(self, mean: ArrayLike, sd: ArrayLike) -> None:
        mean_a, sd_a = np.broadcast_arrays(
            np.asarray(mean, dtype=float), np.asarray(sd, dtype=float)
        )
        self.mean = np.array(mean_a, dtype=float)
        self.input_sd = np.array(sd_a, dtype=float)
        with np.errstate(all="ignore"):
            self._setup()

    @abstractmethod
    def _setup(self) -> None:
        """Set the safe parameters, the bad-input mask and the point-mass mask."""

    # raw functions on broadcast arrays with safe parameters ---------------------------
    @abstractmethod
    def _cdf_raw(self, x: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray: ...

    @abstractmethod
    def _sf_raw(self, x: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray: ...

    @abstractmethod
    def _es_raw(
        self, x: np.ndarray, mean: np.ndarray, prm: tuple[np.ndarray, ...]
    ) -> np.ndarray: ...

    @abstractmethod
    def _ppf_raw(self, p: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray: ...

    @abstractmethod
    def _isf_raw(self, t: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray: ...

    @abstractmethod
    def _min_r_raw(
        self, t: np.ndarray, inner: np.ndarray, prm: tuple[np.ndarray, ...]
    ) -> np.ndarray:
        """The search for 0 < t < mean (``inner``); other items get any finite value."""

    # helpers ---------------------------------------------------------------------------
    def _b(
        self, x: ArrayLike
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray, tuple[np.ndarray, ...]]:
        """Broadcast x with the item arrays: (x, mean, sd, bad, point, params)."""
        arrays = np.broadcast_arrays(
            np.asarray(x, dtype=float),
            self.mean,
            self.sd,
            self._bad,
            self._point,
            *self._params,
        )
        x_b, mean, sd, bad, point = arrays[:5]
        return x_b, mean, sd, bad, point, tuple(arrays[5:])

    def _finish(
        self, out: np.ndarray, point_value: np.ndarray, point: np.ndarray, nan_mask: np.ndarray
    ) -> np.ndarray:
        out = np.where(point, point_value, out)
        return np.where(nan_mask, np.nan, out)

    # interface -------------------------------------------------------------------------
    def cdf(self, r: ArrayLike) -> np.ndarray:
        """P(X <= r) (discrete models: P(X <= floor(r))); a step at the mean for a point mass."""
        x, mean, _, bad, point, prm = self._b(r)
        with np.errstate(all="ignore"):
            raw = self._cdf_raw(x, prm)
            step = (x >= mean - _STEP_TOL * np.maximum(1.0, np.abs(mean))).astype(float)
            return self._finish(raw, step, point, bad | np.isnan(x))

    def sf(self, r: ArrayLike) -> np.ndarray:
        """P(X > r), from scipy's survival function (accurate in the upper tail)."""
        x, mean, _, bad, point, prm = self._b(r)
        with np.errstate(all="ignore"):
            raw = self._sf_raw(x, prm)
            step = (x < mean - _STEP_TOL * np.maximum(1.0, np.abs(mean))).astype(float)
            return self._finish(raw, step, point, bad | np.isnan(x))

    def expected_shortage(self, r: ArrayLike) -> np.ndarray:
        """E[(X - r)^+], exact for any real r; max(mean - r, 0) for a point mass."""
        x, mean, _, bad, point, prm = self._b(r)
        with np.errstate(all="ignore"):
            raw = self._es_raw(x, mean, prm)
            raw = np.where(x == np.inf, 0.0, np.where(x == -np.inf, np.inf, raw))
            return self._finish(raw, np.maximum(mean - x, 0.0), point, bad | np.isnan(x))

    def quantile(self, p: ArrayLike) -> np.ndarray:
        """Smallest r with P(X <= r) >= p (discrete: a whole number; p = 0 gives -inf).

        The mean for a point mass; p outside [0, 1] gives NaN.
        """
        x, mean, _, bad, point, prm = self._b(p)
        with np.errstate(all="ignore"):
            inside = (x >= 0) & (x <= 1)
            raw = self._ppf_raw(np.where(inside, x, 0.5), prm)
            return self._finish(raw, mean, point, bad | ~inside)

    def upper_quantile(self, tail: ArrayLike) -> np.ndarray:
        """r with P(X > r) = tail; discrete models: the smallest whole r with P(X > r) <= tail.

        Accurate for tiny tails (not computed as a quantile of 1 - tail). tail = 1 gives
        -inf, tail = 0 gives +inf, outside [0, 1] NaN; the mean for a point mass.
        """
        x, mean, _, bad, point, prm = self._b(tail)
        with np.errstate(all="ignore"):
            inner = (x > 0) & (x < 1)
            raw = self._isf_raw(np.where(inner, x, 0.5), prm)
            raw = np.where(x == 0, np.inf, np.where(x == 1, -np.inf, raw))
            return self._finish(raw, mean, point, bad | ~((x >= 0) & (x <= 1)))

    def min_r_for_shortage(self, target_units: ArrayLike) -> np.ndarray:
        """Smallest real r with E[(X - r)^+] <= target_units.

        Demand is never negative, so for r <= 0 the shortage is mean - r exactly and a
        target of at least the mean gives mean - target. Otherwise a search: discrete
        models find the whole k, then solve on the straight piece of E[(X - r)^+] between
        k - 1 and k; gamma bisects. A target of 0 gives +inf; a negative target NaN.
        mean - target for a point mass.
        """
        t, mean, sd, bad, point, prm = self._b(target_units)
        with np.errstate(all="ignore"):
            low = t >= mean
            inner = ~low & (t > 0)
            raw = self._min_r_raw(t, inner, prm)
            raw = np.where(low, mean - t, np.where(t == 0, np.inf, raw))
            return self._finish(raw, mean - t, point, bad | np.isnan(t) | (t < 0))


class _CountModel(_NonNormalModel):
    """Shared parts of the whole-unit (count) models: searches on whole numbers."""

    discrete: ClassVar[bool] = True

    @abstractmethod
    def _guess(self, prm: tuple[np.ndarray, ...]) -> tuple[np.ndarray, np.ndarray]:
        """(mean, variance) of the distribution the safe parameters describe."""

    def _isf_raw(self, t: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        # start from the gamma with the same mean and variance (its isf is accurate in the
        # tail), then the exact whole-number search on scipy's sf
        m, v = self._guess(prm)
        guess = np.ceil(stats.gamma.isf(t, m * m / v, scale=v / m))
        return _first_whole(lambda k: self._sf_raw(k, prm) <= t, guess)

    def _ppf_raw(self, p: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        # The smallest whole k with cdf(k) >= p, by a search on the cdf from a close guess
        # (normal with a skewness term, Cornish-Fisher; common practice): two or three
        # cdf evaluations per item where scipy's own ppf costs about nine.
        if p.ndim != 1:
            return self._ppf_scipy_checked(p, prm)
        m, v = self._guess(prm)
        with np.errstate(all="ignore"):
            z = ndtri(np.clip(p, 1e-300, 1.0 - 1e-16))
            sd = np.sqrt(v)
            skew = (2.0 * v - m) / (m * sd)  # (2 - p) / sqrt(n (1 - p)) for nbinom(n, p)
            guess = np.floor(m + sd * (z + skew * (z * z - 1.0) / 6.0))
        k = _first_whole_at(
            lambda kk, j: self._cdf_raw(kk, tuple(a[j] for a in prm)) >= p[j], guess
        )
        return np.where(p == 0, -np.inf, np.where(p == 1, np.inf, k))

    def _ppf_scipy_checked(self, p: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        # scipy's discrete ppf is the smallest k with cdf(k) >= p; confirm it in double
        # precision on both sides so the promise holds whatever scipy's internals do
        k = self._scipy_ppf(p, prm)
        k = np.where(self._cdf_raw(k - 1.0, prm) >= p, k - 1.0, k)
        k = np.where(self._cdf_raw(k, prm) < p, k + 1.0, k)
        return np.where(p == 0, -np.inf, k)

    @abstractmethod
    def _scipy_ppf(self, p: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray: ...

    def _min_r_raw(
        self, t: np.ndarray, inner: np.ndarray, prm: tuple[np.ndarray, ...]
    ) -> np.ndarray:
        m, v = self._guess(prm)
        t = np.where(inner, t, 0.5 * m)  # a harmless target where the search is not needed
        s = np.sqrt(v)
        guess = m + s * inverse_normal_loss(t / s)
        k = _first_whole(lambda kk: self._es_raw(kk, m, prm) <= t, guess)
        # E[(X - r)^+] falls linearly on [k - 1, k] with slope -P(X > k - 1)
        es_prev = self._es_raw(k - 1.0, m, prm)
        slope = self._sf_raw(k - 1.0, prm)
        r = k - 1.0 + (es_prev - t) / slope
        return np.where(np.isfinite(k) & (slope > 0), np.clip(r, k - 1.0, k), k)


# ---------------------------------------------------------------------------------------
# Poisson
# ---------------------------------------------------------------------------------------


class PoissonLeadTimeDemand(_CountModel):
    """Poisson lead-time demand with the given mean; the sd argument is ignored.

    For slow movers (Axsäter, "Inventory Control", 3rd ed. 2015, ch. 5). Variance = mean,
    so ``sd`` is sqrt(mean) (the given sd is kept as ``input_sd``). Whole units:
    cdf(r) = P(X <= floor(r)). Expected shortage, exact for any real r, with k = floor(r):
    E[(X - r)^+] = mean P(X >= k) - r P(X > k), because x p(x) = mean p(x - 1); for whole r
    this is mean P(X >= r) - r P(X >= r + 1). Mean 0 is a point mass at 0; a negative or
    missing mean gives NaN.
    """

    name: ClassVar[str] = "poisson"

    def _setup(self) -> None:
        mean = self.mean
        self._bad = ~np.isfinite(mean) | (mean < 0)
        self._point = ~self._bad & (mean == 0)
        self.sd = np.sqrt(mean)
        self._params = (np.where(self._bad | self._point, 1.0, mean),)

    def _guess(self, prm: tuple[np.ndarray, ...]) -> tuple[np.ndarray, np.ndarray]:
        return prm[0], prm[0]

    def _cdf_raw(self, x: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        return stats.poisson.cdf(x, prm[0])

    def _sf_raw(self, x: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        return stats.poisson.sf(x, prm[0])

    def _es_raw(self, x: np.ndarray, mean: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        mu = prm[0]
        k = np.floor(x)
        return mu * stats.poisson.sf(k - 1.0, mu) - x * stats.poisson.sf(k, mu)

    def _scipy_ppf(self, p: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        return stats.poisson.ppf(p, prm[0])


# ---------------------------------------------------------------------------------------
# Negative binomial
# ---------------------------------------------------------------------------------------


class NegativeBinomialLeadTimeDemand(_CountModel):
    """Negative binomial lead-time demand with matched mean and variance (over-dispersed counts).

    scipy.stats.nbinom(n, p) with n = mean^2 / (var - mean), p = mean / var, var = sd^2.
    Where var <= mean (including sd = 0) no negative binomial has these moments, so that
    item is Poisson with the same mean (``poisson_fallback`` marks it, and
    :meth:`item_model_names` says "poisson"). Expected shortage, exact for any real r, with
    k = floor(r): E[(X - r)^+] = mean P(Y >= k) - r P(X > k), Y ~ nbinom(n + 1, p) (the
    size-biased distribution: x f(x; n, p) = mean f(x - 1; n + 1, p)). Mean 0 is a point
    mass at 0; a negative or missing mean or sd gives NaN.
    """

    name: ClassVar[str] = "negative binomial"
    poisson_fallback: np.ndarray

    def _setup(self) -> None:
        mean, sd = self.mean, self.input_sd
        self._bad = ~np.isfinite(mean) | (mean < 0) | ~np.isfinite(sd) | (sd < 0)
        self._point = ~self._bad & (mean == 0)
        var = sd * sd
        pois = ~self._bad & ~self._point & (var <= mean)
        nb = ~self._bad & ~self._point & ~pois
        self.poisson_fallback = pois
        self.sd = np.where(pois, np.sqrt(mean), sd)
        var_s = np.where(nb, var, 2.0)
        mean_s = np.where(nb, mean, 1.0)
        n = mean_s * mean_s / (var_s - mean_s)
        p = mean_s / var_s
        self._params = (
            n,
            p,
            pois,
            np.where(pois, mean, 1.0),  # the Poisson mean for fallback items
            np.where(nb, mean, np.where(pois, mean, 1.0)),  # the mean used in formulas
        )

    def item_model_names(self) -> np.ndarray:
        """ "negative binomial", or "poisson" where the variance did not exceed the mean."""
        return np.where(self.poisson_fallback, PoissonLeadTimeDemand.name, self.name).astype(object)

    def _guess(self, prm: tuple[np.ndarray, ...]) -> tuple[np.ndarray, np.ndarray]:
        n, p, pois, mu_p, mu = prm
        return mu, np.where(pois, mu_p, mu / p)

    # Each item is either Poisson (the fallback) or negative binomial: every function below
    # evaluates each distribution on its own items only (_per_item), not both on all.
    def _cdf_raw(self, x: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        n, p, pois, mu_p, _ = prm
        return _per_item(
            pois,
            lambda x_, m_: stats.poisson.cdf(x_, m_),
            lambda x_, n_, p_: stats.nbinom.cdf(x_, n_, p_),
            (x, mu_p),
            (x, n, p),
        )

    def _sf_raw(self, x: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        n, p, pois, mu_p, _ = prm
        return _per_item(
            pois,
            lambda x_, m_: stats.poisson.sf(x_, m_),
            lambda x_, n_, p_: stats.nbinom.sf(x_, n_, p_),
            (x, mu_p),
            (x, n, p),
        )

    def _es_raw(self, x: np.ndarray, mean: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        n, p, pois, mu_p, mu = prm
        k = np.floor(x)

        def po(x_: np.ndarray, k_: np.ndarray, m_: np.ndarray) -> np.ndarray:
            return m_ * stats.poisson.sf(k_ - 1.0, m_) - x_ * stats.poisson.sf(k_, m_)

        def nb(
            x_: np.ndarray, k_: np.ndarray, mu_: np.ndarray, n_: np.ndarray, p_: np.ndarray
        ) -> np.ndarray:
            return mu_ * stats.nbinom.sf(k_ - 1.0, n_ + 1.0, p_) - x_ * stats.nbinom.sf(k_, n_, p_)

        return _per_item(pois, po, nb, (x, k, mu_p), (x, k, mu, n, p))

    def _scipy_ppf(self, p_: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        n, p, pois, mu_p, _ = prm
        return _per_item(
            pois,
            lambda q_, m_: stats.poisson.ppf(q_, m_),
            lambda q_, n_, pp_: stats.nbinom.ppf(q_, n_, pp_),
            (p_, mu_p),
            (p_, n, p),
        )


def _per_item(
    mask: np.ndarray,
    f_true: Callable[..., np.ndarray],
    f_false: Callable[..., np.ndarray],
    args_true: tuple[np.ndarray, ...],
    args_false: tuple[np.ndarray, ...],
) -> np.ndarray:
    """np.where(mask, f_true(*args_true), f_false(*args_false)), each side evaluated only
    on its own elements (the functions are elementwise, so the numbers are the same).

    Every array has the shape of ``mask`` (the model's broadcast arrays).
    """
    mask = np.asarray(mask, dtype=bool)
    out = np.empty(mask.shape)
    rest = ~mask
    if mask.any():
        out[mask] = f_true(*(np.broadcast_to(a, mask.shape)[mask] for a in args_true))
    if rest.any():
        out[rest] = f_false(*(np.broadcast_to(a, mask.shape)[rest] for a in args_false))
    return out


# ---------------------------------------------------------------------------------------
# Gamma
# ---------------------------------------------------------------------------------------


class GammaLeadTimeDemand(_NonNormalModel):
    """Gamma lead-time demand with matched mean and variance (skewed, continuous).

    shape a = mean^2 / var, scale = var / mean. Expected shortage
    E[(X - r)^+] = mean P(X_{a+1} > r) - r P(X_a > r) (x f(x; a) = mean f(x; a + 1)), which
    is mean - r for r <= 0. sd = 0 or mean = 0 is a point mass at the mean; a negative or
    missing mean or sd gives NaN.
    """

    name: ClassVar[str] = "gamma"

    def _setup(self) -> None:
        mean, sd = self.mean, self.input_sd
        self._bad = ~np.isfinite(mean) | (mean < 0) | ~np.isfinite(sd) | (sd < 0)
        self._point = ~self._bad & ((mean == 0) | (sd == 0))
        self.sd = sd.copy()
        ok = ~self._bad & ~self._point
        mean_s, var_s = np.where(ok, mean, 1.0), np.where(ok, sd * sd, 1.0)
        self._params = (mean_s * mean_s / var_s, var_s / mean_s, mean_s)

    def _cdf_raw(self, x: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        return stats.gamma.cdf(x, prm[0], scale=prm[1])

    def _sf_raw(self, x: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        return stats.gamma.sf(x, prm[0], scale=prm[1])

    def _es_raw(self, x: np.ndarray, mean: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        a, scale, mu = prm
        return mu * stats.gamma.sf(x, a + 1.0, scale=scale) - x * stats.gamma.sf(x, a, scale=scale)

    def _ppf_raw(self, p: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        return stats.gamma.ppf(p, prm[0], scale=prm[1])

    def _isf_raw(self, t: np.ndarray, prm: tuple[np.ndarray, ...]) -> np.ndarray:
        return stats.gamma.isf(t, prm[0], scale=prm[1])

    def _min_r_raw(
        self, t: np.ndarray, inner: np.ndarray, prm: tuple[np.ndarray, ...]
    ) -> np.ndarray:
        # E[(X - r)^+] falls strictly from mean at r = 0: bracket [0, hi] and bisect
        a, scale, mu = prm
        t = np.where(inner, t, 0.5 * mu)
        hi = np.maximum(mu + 10.0 * np.sqrt(a) * scale, 1.0)
        for _ in range(_SEARCH_STEPS):
            high = self._es_raw(hi, mu, prm) > t
            if not high.any():
                break
            hi = np.where(high, 2.0 * hi, hi)
        lo = np.zeros_like(hi)
        for _ in range(_CONT_BISECTION_STEPS):
            mid = 0.5 * (lo + hi)
            active = (mid > lo) & (mid < hi)
            if not active.any():
                break
            above = self._es_raw(mid, mu, prm) > t
            lo = np.where(active & above, mid, lo)
            hi = np.where(active & ~above, mid, hi)
        return np.where(self._es_raw(hi, mu, prm) <= t, hi, np.inf)


#: The lead-time demand models by name, in the order the workbook lists them.
MODEL_NAMES: tuple[str, ...] = ("normal", "poisson", "negative binomial", "gamma")

_MODELS: dict[str, type[LeadTimeDemandModel]] = {
    NormalLeadTimeDemand.name: NormalLeadTimeDemand,
    PoissonLeadTimeDemand.name: PoissonLeadTimeDemand,
    NegativeBinomialLeadTimeDemand.name: NegativeBinomialLeadTimeDemand,
    GammaLeadTimeDemand.name: GammaLeadTimeDemand,
}


def model_factory(name: str) -> type[LeadTimeDemandModel]:
    """The model class for a name in MODEL_NAMES (case and outer spaces ignored).

    Raises ValueError for any other name; callers that take names from a user check them
    against MODEL_NAMES first.
    """
    key = str(name).strip().lower()
    if key not in _MODELS:
        raise ValueError(f"unknown lead-time demand model {name!r}; use one of {MODEL_NAMES}")
    return _MODELS[key]


#: Builds a lead-time demand model from (mean, sd) arrays: a model class or a function.
ModelFactory = Callable[[np.ndarray, np.ndarray], LeadTimeDemandModel]
