"""Lead-time demand models: the distribution of demand over one replenishment lead time.

The policy code talks to a model only through :class:`LeadTimeDemandModel`, so later
models (Poisson, negative binomial, gamma) can be added without touching it. Every method
works on whole columns at once (numpy arrays, broadcast against the model's own arrays);
missing or invalid parameters give NaN, never a warning or an exception.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from typing import ClassVar

import numpy as np
from numpy.typing import ArrayLike
from scipy.special import erfcx, ndtr, ndtri

__all__ = [
    "LeadTimeDemandModel",
    "NormalLeadTimeDemand",
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
    mean: np.ndarray
    sd: np.ndarray

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
