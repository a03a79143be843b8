"""Expected spot replacements ahead of each position, from its lamp's current age.

Per-position delayed renewal: a lamp of age a is replaced when it fails, and every new lamp
is replaced in turn. With F_a(x) = 1 - S(a + x)/S(a), the residual-life distribution, the
expected replacements within the next w burn hours are [Cox, *Renewal Theory*, delayed
renewal process]

    N_a(w) = F_a(w) + ∫_0^w M(w - x) dF_a(x),

M the ordinary renewal function of a new lamp (service.reliability.renewal). For a = 0 this
is the renewal equation itself, N_0(w) = M(w). The Stieltjes integral is a midpoint sum over
NODES cells of [0, w]. Weibull scaling: with u = t/eta, M_eta(t) = M_1(t/eta), so one renewal
curve per shape (lamp type) serves every position whatever its voltage-scaled eta.

Positions of one type with the same (age, window) in scale units (lamps put in together in
one area) have the same N_a(w): it is computed once per distinct pair and copied back,
the same arithmetic per pair, so the values are those of the per-position sum.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from service.reliability.renewal import RenewalCurve, weibull_renewal

FloatArray = NDArray[np.float64]
IntArray = NDArray[np.int64]

NODES = 24  # cells of the Stieltjes sum per position (error about 1e-4 relative)
GRID = 1000  # renewal grid steps per lamp type
CHUNK = 20_000  # positions per block (memory: CHUNK x NODES floats per array)


def expected_replacements(
    shape: FloatArray,
    type_index: IntArray,
    scale_h: FloatArray,
    age_h: FloatArray,
    window_h: FloatArray,
) -> FloatArray:
    """N_a(w) per position: expected replacements in the next window_h burn hours."""
    n = age_h.size
    out = np.zeros(n)
    u_age = age_h / scale_h
    u_win = window_h / scale_h
    for k in np.unique(type_index).tolist():
        idx = np.nonzero((type_index == k) & (u_win > 0))[0]
        if idx.size == 0:
            continue
        first, inverse = _distinct_pairs(u_age[idx], u_win[idx])
        rep = idx[first]
        beta = float(shape[k])
        umax = float(u_win[rep].max())
        curve = weibull_renewal(beta, 1.0, umax * 1.0001, GRID)
        vals = _delayed_renewal(curve, beta, u_age[rep], u_win[rep])
        out[idx] = vals[inverse]
    return out


def _delayed_renewal(
    curve: RenewalCurve, beta: float, u_age: FloatArray, u_win: FloatArray
) -> FloatArray:
    """N_a(w) in scale units by the midpoint Stieltjes sum, CHUNK rows at a time."""
    out = np.empty(u_age.size)
    frac = np.linspace(0.0, 1.0, NODES + 1)
    mid = 0.5 * (frac[1:] + frac[:-1])
    for lo in range(0, u_age.size, CHUNK):
        a = u_age[lo : lo + CHUNK][:, None]
        w = u_win[lo : lo + CHUNK][:, None]
        x = w * frac[None, :]
        # F_a(x) = 1 - exp(-((a+x)^beta - a^beta)), written to keep precision.
        f_a = -np.expm1(-(np.power(a + x, beta) - np.power(a, beta)))
        d_f = np.diff(f_a, axis=1)
        m_mid = curve.at(w * (1.0 - mid[None, :]))
        out[lo : lo + CHUNK] = f_a[:, -1] + np.sum(d_f * m_mid, axis=1)
    return out


def _distinct_pairs(a: FloatArray, b: FloatArray) -> tuple[IntArray, IntArray]:
    """First index of each distinct (a, b) pair and each element's pair number (NaN: unique)."""
    order = np.lexsort((b, a))
    sa, sb = a[order], b[order]
    new = np.ones(a.size, dtype=bool)
    new[1:] = (sa[1:] != sa[:-1]) | (sb[1:] != sb[:-1])
    inverse = np.empty(a.size, dtype=np.int64)
    inverse[order] = np.cumsum(new) - 1
    return order[new], inverse
