"""A range for the count of burnouts over a horizon: event chance plus parameter uncertainty.

Given the Weibull parameters, position j (burning, wear equivalent to age a_j at today's
supply, effective scale eta_j) burns out within the horizon w with probability
p_j = 1 - exp(-(H1_j - H0_j)), H1 = ((a + w)/eta)^beta, H0 = (a/eta)^beta. Positions fail
independently, so the count is Poisson-binomial: mean sum p, variance sum p (1 - p)
(reliability/poisson_binomial.py).

The parameters are themselves estimates. Each lamp type's (ln beta, ln eta) has a
covariance (the field fit's, or the credibility blend's prior for the catalogue curve); all
positions of a type share them, so their errors add up across the fleet instead of
averaging out. Delta method [published: e.g. Casella & Berger, *Statistical Inference*,
§5.5.4; Meeker & Escobar, *Statistical Methods for Reliability Data*, App. B]: the mean
count's variance is sum over types g_t' Sigma_t g_t with g_t the gradient of sum_j p_j over
that type's positions:

    dp/d ln eta  = -(1 - p) beta (H1 - H0)
    dp/d ln beta =  (1 - p) beta (H1 ln((a + w)/eta) - H0 ln(a/eta))   (the H0 term 0 at a = 0)

(eta_j = eta_type x the position's life factor, so d ln eta_j = d ln eta_type.) By the law
of total variance the count's variance is about sum p (1 - p) + g' Sigma g. The range at a
level is the continuity-corrected normal interval [ceil(mu - z sd - 1/2), ceil(mu + z sd - 1/2)]
(clipped to [0, n]); with no parameter uncertainty and at most EXACT_MAX positions the
exact Poisson-binomial quantiles are used instead.

MIXTURE (count_mixture, used by forecasts): the normal interval above undercovers when the
shared scale's spread is large (sigma = 0.246 at beta = 3, the catalogue prior: the count
is skewed). The range is then the quantiles of the count's mixture over each lamp type's
lognormal scale (and its shape where the fit gives shape bounds), per type
reliability/mixture.py (Gauss-Hermite nodes, fine-grid mixture CDF, exact Poisson-binomial
or its refined normal approximation), types independent so their pmfs convolve.
count_range stays as the normal approximation (kept for comparison).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import ndtri

from service.reliability import mixture as mx
from service.reliability.poisson_binomial import EXACT_MAX, pmf_dft

FloatArray = NDArray[np.float64]


@dataclass(frozen=True)
class CountRange:
    """A count's mean and range at `level`, and what the variance came from."""

    mean: float
    low: int
    high: int
    level: float
    var_events: float  # sum p (1 - p): which positions fail, parameters known
    var_params: float  # delta method: the parameters' uncertainty
    method: str


def window_gradients(
    age_h: ArrayLike, horizon_h: ArrayLike, shape: ArrayLike, scale_h: ArrayLike
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """(p, dp/d ln beta, dp/d ln eta) of burning out within the horizon, per position."""
    a = np.asarray(age_h, dtype=np.float64)
    w = np.asarray(horizon_h, dtype=np.float64)
    beta = np.asarray(shape, dtype=np.float64)
    eta = np.asarray(scale_h, dtype=np.float64)
    x0, x1 = a / eta, (a + w) / eta
    h0, h1 = np.power(x0, beta), np.power(x1, beta)
    surv = np.exp(-(h1 - h0))  # 1 - p
    p = -np.expm1(-(h1 - h0))
    with np.errstate(divide="ignore", invalid="ignore"):
        l0 = np.where(x0 > 0, h0 * np.log(np.where(x0 > 0, x0, 1.0)), 0.0)
        l1 = np.where(x1 > 0, h1 * np.log(np.where(x1 > 0, x1, 1.0)), 0.0)
    d_ln_shape = surv * beta * (l1 - l0)
    d_ln_scale = -surv * beta * (h1 - h0)
    return p, d_ln_shape, d_ln_scale


def sd_from_bounds(lower: float, upper: float, confidence: float) -> float:
    """Standard deviation of ln(x) from two-sided log-symmetric bounds at `confidence`."""
    if not (0 < lower <= upper) or not (0 < confidence < 1):
        raise ValueError("bounds must be positive and ordered, confidence in (0, 1)")
    return math.log(upper / lower) / (2.0 * float(ndtri(0.5 + confidence / 2.0)))


def parameter_variance(
    group: ArrayLike,
    d_ln_shape: ArrayLike,
    d_ln_scale: ArrayLike,
    sd_ln_shape: ArrayLike,
    sd_ln_scale: ArrayLike,
    corr: ArrayLike = 0.0,
) -> float:
    """Delta-method variance of sum p: per parameter group t, g_t' Sigma_t g_t, summed."""
    g = np.asarray(group, dtype=np.int64)
    if g.size == 0:  # no positions (an empty site): no parameter spread to carry
        return 0.0
    # groups: as many as the parameter arrays hold, or as the positions name if more
    sizes = [np.size(sd_ln_shape), np.size(sd_ln_scale), np.size(corr), int(g.max()) + 1]
    n_g = max(sizes)
    sb = np.broadcast_to(np.asarray(sd_ln_shape, dtype=np.float64), (n_g,))
    se = np.broadcast_to(np.asarray(sd_ln_scale, dtype=np.float64), (n_g,))
    rho = np.broadcast_to(np.asarray(corr, dtype=np.float64), (n_g,))
    gb = np.bincount(g, weights=np.asarray(d_ln_shape, dtype=np.float64), minlength=n_g)
    ge = np.bincount(g, weights=np.asarray(d_ln_scale, dtype=np.float64), minlength=n_g)
    var = gb * gb * sb * sb + ge * ge * se * se + 2.0 * rho * gb * ge * sb * se
    return float(var.sum())


def count_range(p: ArrayLike, var_params: float = 0.0, level: float = 0.90) -> CountRange:
    """Central `level` range of a Poisson-binomial count plus parameter variance."""
    if not 0 < level < 1:
        raise ValueError("level must be in (0, 1)")
    pr = np.clip(np.asarray(p, dtype=np.float64), 0.0, 1.0)
    n = int(pr.size)
    mean = float(pr.sum())
    var_e = float((pr * (1.0 - pr)).sum())
    tail = (1.0 - level) / 2.0
    if var_params <= 0 and n <= EXACT_MAX:
        cdf = np.cumsum(pmf_dft(pr))
        low = int(np.searchsorted(cdf, tail - 1e-12))
        high = int(np.searchsorted(cdf, 1.0 - tail - 1e-12))
        method = "Poisson-binomial, exact (DFT of the characteristic function)"
        return CountRange(mean, min(low, n), min(high, n), level, var_e, 0.0, method)
    sd = math.sqrt(var_e + max(var_params, 0.0))
    z = float(ndtri(1.0 - tail))
    low = max(math.ceil(mean - z * sd - 0.5), 0)
    high = min(max(math.ceil(mean + z * sd - 0.5), 0), n)
    method = (
        "normal approximation (continuity-corrected): Poisson-binomial variance sum p(1-p) "
        "+ delta-method variance from the life curves' parameter uncertainty"
    )
    return CountRange(mean, min(low, n), high, level, var_e, max(var_params, 0.0), method)


@dataclass(frozen=True)
class GroupCurve:
    """One lamp type's positions in a count: windows, curve and its parameter spread."""

    age_h: FloatArray
    horizon_h: FloatArray
    shape: FloatArray  # per position (a type's rows may differ only by voltage response)
    scale_h: FloatArray
    sd_ln_shape: float
    sd_ln_scale: float


MIXTURE_METHOD = (
    "mixture over each lamp type's lognormal scale (sd of ln eta from the curve's bounds or "
    "the catalogue prior){shape}: {nodes} Gauss-Hermite nodes, the mixture CDF on a {fine}-"
    "point fine grid, Poisson-binomial exact or refined-normal (Volkova) at each point, "
    "lamp types convolved as independent"
)


FORECAST_EXACT_BUDGET = 2.0e5  # exact recursion cells per type per range (one per area summary)


def window_p(
    age_h: ArrayLike, horizon_h: ArrayLike, shape: ArrayLike, scale_h: ArrayLike
) -> FloatArray:
    """P(burn out within the horizon) = 1 - exp(-(H(a + w) - H(a))), broadcast."""
    a = np.asarray(age_h, dtype=np.float64)
    b = np.asarray(shape, dtype=np.float64)
    e = np.asarray(scale_h, dtype=np.float64)
    h = np.power((a + np.asarray(horizon_h, dtype=np.float64)) / e, b) - np.power(a / e, b)
    return np.asarray(-np.expm1(-h), dtype=np.float64)


def _type_mixtures(g: GroupCurve, r: mx.Rule) -> tuple[list[tuple[float, mx.Mixture]], FloatArray]:
    """One type's count mixed over its scale, per outer shape node (weight, mixture), and
    (E[S], E[S^2], E[sum p(1-p)]) with S = sum p."""
    zb, wb = mx.gauss_hermite(mx.SHAPE_NODES) if g.sd_ln_shape > 0 else (np.zeros(1), np.ones(1))
    rs = r if g.sd_ln_scale > 0 else mx.rule(1)
    out: list[tuple[float, mx.Mixture]] = []
    stats = np.zeros(3)
    for zs, ws in zip(zb.tolist(), wb.tolist(), strict=True):
        beta = g.shape * math.exp(g.sd_ln_shape * zs)
        mult = mx.lognormal_multipliers(g.sd_ln_scale, rs.z)
        p_nodes = window_p(g.age_h, g.horizon_h, beta, g.scale_h[None, :] * mult[:, None])
        p_nodes = p_nodes[:, :, None]
        mom = mx.Moments.of(p_nodes)
        out.append((ws, mx.mixture(mom, int(g.age_h.size), rs, p_nodes, FORECAST_EXACT_BUDGET)))
        s_k = mom.mean[:, 0]
        stats += ws * np.array([rs.w @ s_k, rs.w @ (s_k * s_k), rs.w @ mom.var[:, 0]])
    return out, stats


def _binned_total(types: list[list[tuple[float, mx.Mixture]]]) -> tuple[int, FloatArray, int]:
    """(offset, pmf, bin width) of the sum of independent types, each a weighted mixture."""
    spans = [[m.span() for _, m in t] for t in types]
    widest = max(max(h for _, h in sp) - min(lo for lo, _ in sp) + 1 for sp in spans)
    width = max(1, math.ceil(widest / mx.MAX_BINS))
    parts: list[tuple[int, FloatArray]] = []
    for t, sp in zip(types, spans, strict=True):
        lo, hi = min(a for a, _ in sp), max(b for _, b in sp)
        bins = (hi - lo) // width + 1
        pmf = sum(w * m.binned(lo, width, bins) for w, m in t)
        parts.append((lo, np.asarray(pmf, dtype=np.float64)))
    # offsets in counts, bins of `width`: convolve on the bin lattice from each type's lo
    off = sum(o for o, _ in parts)
    _, pmf = mx.convolve([(0, q) for _, q in parts])
    return off, pmf, width


def count_mixture(groups: list[GroupCurve], level: float = 0.90) -> CountRange:
    """Central `level` range of the count over lamp types, each mixed over its curve's spread."""
    if not 0 < level < 1:
        raise ValueError("level must be in (0, 1)")
    r = mx.rule()
    types: list[list[tuple[float, mx.Mixture]]] = []
    stats = np.zeros(3)
    for g in groups:
        if g.age_h.size:
            t, st = _type_mixtures(g, r)
            types.append(t)
            stats += np.array([st[0], st[1] - st[0] ** 2, st[2]])
    tail = (1.0 - level) / 2.0
    n = sum(int(g.age_h.size) for g in groups)
    if not types:
        low = high = 0
    elif len(types) == 1 and len(types[0]) == 1:  # one mixture: its quantiles by bisection
        mix = types[0][0][1]
        low, high = int(mix.quantile(tail)[0]), int(mix.quantile(1.0 - tail)[0])
    else:
        off, pmf, width = _binned_total(types)
        low = min(mx.quantile_of(off, pmf, tail, width, len(types)), n)
        high = min(mx.quantile_of(off, pmf, 1.0 - tail, width, len(types)), n)
    shape = ", and its shape where the field shape is used as it is (correlation 0)"
    method = MIXTURE_METHOD.format(
        shape=shape if any(g.sd_ln_shape > 0 for g in groups) else "",
        nodes=mx.NODES,
        fine=mx.FINE,
    )
    return CountRange(
        float(stats[0]), low, high, level, float(stats[2]), max(float(stats[1]), 0.0), method
    )
