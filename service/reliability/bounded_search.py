"""Brent's bounded minimisation for many independent problems at once (numpy, masked steps).

The method of Brent [Brent, *Algorithms for Minimization Without Derivatives*, ch. 5;
Forsythe, Malcolm & Moler, *Computer Methods for Mathematical Computations*, fmin]: golden
section steps with parabolic interpolation, stopping when the bracket is within
tol = sqrt(eps)·|x| + xatol/3 of the best point. The step sequence follows scipy's
`minimize_scalar(method="bounded")` operation for operation, so for the same function values
each problem ends on the same point as a scalar call would (tests compare them), while the
function is evaluated once per step for every problem still searching.
"""

from __future__ import annotations

from collections.abc import Callable
from math import sqrt

import numpy as np
from numpy.typing import NDArray

FloatArray = NDArray[np.float64]
BoolArray = NDArray[np.bool_]
IntArray = NDArray[np.intp]

_SQRT_EPS = sqrt(2.2e-16)
_GOLDEN = 0.5 * (3.0 - sqrt(5.0))
MAX_EVALUATIONS = 500  # scipy's default maxiter for the bounded method


def _sign(x: FloatArray) -> FloatArray:
    """np.sign with 0 counted as +1, as the scalar method steps."""
    out: FloatArray = np.sign(x) + (x == 0)
    return out


def _step(s: dict[str, FloatArray], xatol: FloatArray) -> FloatArray:
    """The next trial point of every problem (updates e and rat in s)."""
    xf, fx, nfc, fnfc, fulc, ffulc = s["xf"], s["fx"], s["nfc"], s["fnfc"], s["fulc"], s["ffulc"]
    a, b, e, rat = s["a"], s["b"], s["e"], s["rat"]
    xm = 0.5 * (a + b)
    tol1 = _SQRT_EPS * np.abs(xf) + xatol / 3.0
    tol2 = 2.0 * tol1
    parabolic = np.abs(e) > tol1
    with np.errstate(divide="ignore", invalid="ignore"):
        r = (xf - nfc) * (fx - ffulc)
        q = (xf - fulc) * (fx - fnfc)
        p = (xf - fulc) * q - (xf - nfc) * r
        q = 2.0 * (q - r)
        p = np.where(q > 0.0, -p, p)
        q = np.abs(q)
        r_old = e
        accept = (
            parabolic
            & (np.abs(p) < np.abs(0.5 * q * r_old))
            & (p > q * (a - xf))
            & (p < q * (b - xf))
        )
        rat_p = (p + 0.0) / q
    x_p = xf + rat_p
    near_edge = ((x_p - a) < tol2) | ((b - x_p) < tol2)
    rat_p = np.where(near_edge, tol1 * _sign(xm - xf), rat_p)
    e_gold = np.where(xf >= xm, a - xf, b - xf)
    # Parabola tried: e takes the old rat; golden step: e is the larger segment.
    e_new = np.where(accept, rat, e_gold)
    rat_new = np.where(accept, rat_p, _GOLDEN * e_gold)
    s["e"], s["rat"] = e_new, rat_new
    out: FloatArray = xf + _sign(rat_new) * np.maximum(np.abs(rat_new), tol1)
    return out


def _update(s: dict[str, FloatArray], x: FloatArray, fu: FloatArray, on: BoolArray) -> None:
    """Bracket and best-three bookkeeping after evaluating fu = f(x) (only where `on`)."""
    xf, fx, nfc, fnfc, fulc, ffulc = s["xf"], s["fx"], s["nfc"], s["fnfc"], s["fulc"], s["ffulc"]
    better = fu <= fx
    a = np.where(better, np.where(x >= xf, xf, s["a"]), np.where(x < xf, x, s["a"]))
    b = np.where(better, np.where(x >= xf, s["b"], xf), np.where(x < xf, s["b"], x))
    second = ~better & ((fu <= fnfc) | (nfc == xf))
    third = ~better & ~second & ((fu <= ffulc) | (fulc == xf) | (fulc == nfc))
    new = {
        "a": a,
        "b": b,
        "fulc": np.where(better | second, nfc, np.where(third, x, fulc)),
        "ffulc": np.where(better | second, fnfc, np.where(third, fu, ffulc)),
        "nfc": np.where(better, xf, np.where(second, x, nfc)),
        "fnfc": np.where(better, fx, np.where(second, fu, fnfc)),
        "xf": np.where(better, x, xf),
        "fx": np.where(better, fu, fx),
    }
    for k, v in new.items():
        s[k] = np.where(on, v, s[k])


def bounded_minimum_many(
    cost: Callable[[FloatArray, IntArray], FloatArray],
    lo: FloatArray,
    hi: FloatArray,
    xatol: FloatArray,
) -> tuple[FloatArray, FloatArray]:
    """(x, f(x)) at a local minimum of each problem on [lo, hi], Brent's bounded method.

    cost(x, rows) evaluates problem rows[i]'s function at x[i] (x and rows of equal length).
    """
    lo = np.asarray(lo, dtype=np.float64)
    hi = np.asarray(hi, dtype=np.float64)
    xatol = np.asarray(xatol, dtype=np.float64)
    if np.any(~np.isfinite(lo)) or np.any(~np.isfinite(hi)) or np.any(lo > hi):
        raise ValueError("bounds must be finite with lo <= hi")
    all_rows = np.arange(lo.size, dtype=np.intp)
    xf = lo + _GOLDEN * (hi - lo)
    fx = np.asarray(cost(xf, all_rows), dtype=np.float64)
    zero = np.zeros_like(lo)
    s = {"a": lo, "b": hi, "xf": xf, "fx": fx, "nfc": xf, "fnfc": fx, "fulc": xf, "ffulc": fx}
    s["e"], s["rat"] = zero, zero
    evaluations = 1
    while evaluations < MAX_EVALUATIONS:
        xm = 0.5 * (s["a"] + s["b"])
        tol2 = 2.0 * (_SQRT_EPS * np.abs(s["xf"]) + xatol / 3.0)
        on = np.abs(s["xf"] - xm) > (tol2 - 0.5 * (s["b"] - s["a"]))
        if not on.any():
            break
        before = {k: s[k] for k in ("e", "rat")}
        x = _step(s, xatol)
        for k, v in before.items():  # finished problems keep their state
            s[k] = np.where(on, s[k], v)
        rows = np.nonzero(on)[0].astype(np.intp)
        fu = np.full_like(lo, np.inf)
        fu[rows] = cost(x[rows], rows)
        _update(s, x, fu, on)
        evaluations += 1
    return s["xf"], s["fx"]
