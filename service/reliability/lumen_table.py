"""Many lumen curves evaluated at once: one position per row, each on its own type's curve.

LumenCurve.at evaluates one curve (scipy's PchipInterpolator finds each point's interval by
binary search). A fleet has K curves and N positions; grouping positions by type and calling
each curve costs a sort, 2K gathers and scatters and N log(knots) searches. This table holds
every curve's pieces in flat arrays instead and finds a point's piece in O(1): each curve's x
range is cut into CELLS equal cells, and a cell table gives the piece holding each cell's
left edge; the point's piece is that one or a later one (a step forward per knot inside the
cell, at most a few steps, vectorised). The cubic of the piece is then evaluated by Horner's
rule with scipy's own PCHIP coefficients (PPoly.c, highest power first), so values agree
with LumenCurve.at to rounding (tests/reliability/test_lumen_table.py).

Semantics are LumenCurve.at's: hours clamped at 0 and at the curve's valid_to_h; rated-life
curves read at hours / life; beyond the last point a straight line on the last piece's slope
(never rising) floored at 0; exponential curves B exp(-alpha t) evaluated exactly.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from service.reliability.arrays import BoolArray, FloatArray, IndexArray
from service.reliability.lumen import LumenCurve

CELLS = 64  # cells per curve; a cell holding several knots costs one extra step per knot


@dataclass(frozen=True, eq=False)
class LumenTable:
    """K lumen curves as flat piece arrays (M pieces in all) and per-curve columns."""

    per_life: BoolArray  # (K,) x axis in fractions of rated life
    cap_h: FloatArray  # (K,) hours past which the curve is held (inf = no cap)
    is_exp: BoolArray  # (K,) exact exponential B exp(-alpha t)
    decay_b: FloatArray  # (K,) B (NaN unless exponential)
    decay_alpha: FloatArray  # (K,) alpha, per hour
    cell_scale: FloatArray  # (K,) CELLS / last knot (0 for a flat curve)
    first_piece: IndexArray  # (K * (CELLS + 1),) piece holding each cell's left edge
    split: FloatArray  # (K * (CELLS + 1),) the first knot inside the cell (inf = none)
    crowded: bool  # some cell holds more than one knot (a second step may be needed)
    left: FloatArray  # (M,) each piece's left knot
    right: FloatArray  # (M,) each piece's right knot (inf for a curve's tail)
    coef: FloatArray  # (4, M) cubic coefficients in (x - left), highest power first

    @classmethod
    def from_curves(cls, curves: Sequence[LumenCurve]) -> LumenTable:
        """Flatten the curves' PCHIP pieces (scipy's coefficients) into one table.

        Each curve ends with a linear tail piece from its last knot on: f_last + slope (x -
        x_last), the rule of LumenCurve beyond its points, floored at 0 when evaluated.
        """
        per_life, is_exp, crowded = [], [], False
        cols: dict[str, list[float]] = {n: [] for n in ("cap_h", "b", "alpha", "scale")}
        first: list[IndexArray] = []
        splits: list[FloatArray] = []
        lefts: list[FloatArray] = []
        rights: list[FloatArray] = []
        coefs: list[FloatArray] = []
        start = 0
        for curve in curves:
            xs, fs = curve.knots
            exact = curve.decay_b is not None and curve.decay_alpha is not None
            per_life.append(curve.basis == "rated_life_fraction")
            is_exp.append(exact)
            cols["cap_h"].append(math.inf if curve.valid_to_h is None else curve.valid_to_h)
            cols["b"].append(curve.decay_b if curve.decay_b is not None else math.nan)
            cols["alpha"].append(curve.decay_alpha if curve.decay_alpha is not None else math.nan)
            interp = curve.interpolator
            if interp is None:  # one point: flat everywhere, one piece over [0, inf)
                c = np.array([[0.0], [0.0], [0.0], [float(fs[0])]])
                left, scale = np.array([0.0]), 0.0
            else:
                x_last, f_last = float(xs[-1]), float(fs[-1])
                slope = min((f_last - float(fs[-2])) / (x_last - float(xs[-2])), 0.0)
                tail = np.array([[0.0], [0.0], [slope], [f_last]])
                c = np.concatenate((np.asarray(interp.c, dtype=np.float64), tail), axis=1)
                left = np.asarray(xs, dtype=np.float64)  # the pieces' left knots, tail last
                scale = CELLS / x_last
            right = np.concatenate((left[1:], [math.inf]))
            cols["scale"].append(scale)
            # Cell c covers [c, c + 1) / scale; the last cell (c = CELLS) everything beyond.
            edges = np.arange(CELLS + 1, dtype=np.float64) / scale if scale else np.zeros(CELLS + 1)
            piece = np.clip(np.searchsorted(left, edges, side="right") - 1, 0, left.size - 1)
            nxt = np.concatenate((edges[1:], [math.inf])) if scale else np.full(CELLS + 1, np.inf)
            split = np.where(right[piece] < nxt, right[piece], math.inf)
            # A cell whose second knot also lies inside it needs another step.
            second = right[np.minimum(piece + 1, left.size - 1)]
            crowded |= bool(np.any((split < math.inf) & (second < nxt)))
            first.append(start + piece)
            splits.append(split)
            lefts.append(left)
            rights.append(right)
            coefs.append(c)
            start += left.size
        arr = {n: np.asarray(v, dtype=np.float64) for n, v in cols.items()}
        return cls(
            per_life=np.asarray(per_life, dtype=bool),
            cap_h=arr["cap_h"],
            is_exp=np.asarray(is_exp, dtype=bool),
            decay_b=arr["b"],
            decay_alpha=arr["alpha"],
            cell_scale=arr["scale"],
            first_piece=np.concatenate(first).astype(np.intp) if first else _no_index(),
            split=np.concatenate(splits) if splits else np.empty(0),
            crowded=crowded,
            left=np.concatenate(lefts) if lefts else np.empty(0),
            right=np.concatenate(rights) if rights else np.empty(0),
            coef=np.concatenate(coefs, axis=1) if coefs else np.empty((4, 0)),
        )

    @property
    def any_cap(self) -> bool:
        """Whether any curve is held past a limit (valid_to_h)."""
        return bool(np.isfinite(self.cap_h).any())

    @property
    def any_per_life(self) -> bool:
        """Whether any curve reads in fractions of rated life (needs a life per position)."""
        return bool(self.per_life.any())

    def reader(self, k: IndexArray, life_h: FloatArray | None) -> LumenReader:
        """The per-position columns for reading positions k (life_h: hours, rated-life curves)."""
        if self.any_per_life:
            if life_h is None:
                raise ValueError("a lumen curve is in fractions of rated life: give life_h")
            x_per_h = np.where(self.per_life[k], 1.0 / life_h, 1.0)
        else:
            x_per_h = np.ones(k.size)
        exp_rows = np.nonzero(self.is_exp[k])[0] if self.is_exp.any() else _no_index()
        return LumenReader(
            self,
            cap_h=self.cap_h[k] if self.any_cap else self.cap_h[:0],
            x_per_h=x_per_h,
            cell_per_h=x_per_h * self.cell_scale[k],
            cell_base=k * (CELLS + 1),
            exp_rows=exp_rows,
            exp_b=self.decay_b[k[exp_rows]],
            exp_alpha=self.decay_alpha[k[exp_rows]],
        )

    def at(self, k: IndexArray, hours: FloatArray, life_h: FloatArray | None) -> FloatArray:
        """Fraction of initial lumens of position i on curve k[i] at hours[i].

        life_h[i] (hours, > 0) is needed where the curve reads in fractions of rated life.
        """
        return self.reader(k, life_h).at(hours)


@dataclass(frozen=True, eq=False)
class LumenReader:
    """A LumenTable's columns gathered for N positions, to read them at several times."""

    table: LumenTable
    cap_h: FloatArray
    x_per_h: FloatArray  # the curve's x units per hour: 1 / life for rated-life curves
    cell_per_h: FloatArray  # cells per hour
    cell_base: IndexArray  # the position's curve's first cell
    exp_rows: IndexArray  # positions on exponential curves
    exp_b: FloatArray
    exp_alpha: FloatArray

    def at(self, hours: FloatArray, *, nonnegative: bool = False) -> FloatArray:
        """Fraction of initial lumens of each position at its burn hours (nonnegative: known)."""
        tb = self.table
        t = hours if nonnegative else np.maximum(hours, 0.0)
        if tb.any_cap:
            t = np.minimum(t, self.cap_h)
        u = t * self.x_per_h
        cell = np.minimum(t * self.cell_per_h, CELLS).astype(np.intp)
        cell += self.cell_base
        j = tb.first_piece[cell]
        j += u >= tb.split[cell]
        if tb.crowded:  # step on past further knots inside a cell
            step = u >= tb.right[j]
            while step.any():
                j += step
                step = u >= tb.right[j]
        dx = u - tb.left[j]
        c = tb.coef
        out = c[0, j] * dx
        out += c[1, j]
        out *= dx
        out += c[2, j]
        out *= dx
        out += c[3, j]
        np.maximum(out, 0.0, out=out)
        if self.exp_rows.size:
            out[self.exp_rows] = self.exp_b * np.exp(-self.exp_alpha * t[self.exp_rows])
        return out


def _no_index() -> IndexArray:
    return np.empty(0, dtype=np.intp)
