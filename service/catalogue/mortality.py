"""Catalogue side of the mortality-curve fit: the stored point format and its read form.

The fit itself is the numeric core's (service.reliability.mortality: least squares on the
Weibull probability plot; the points set the shape, the rated life the scale). This adapter
only knows the catalogue's format, mortality_points = [[% of rated life, % surviving], ...],
checks it with messages fit for a 422 answer, and turns a fit into the lamp-type model block.
"""

from __future__ import annotations

from collections.abc import Sequence

from pydantic import BaseModel, Field

from service.reliability.mortality import MortalityFit, mortality_problem
from service.reliability.mortality import fit_mortality_points as core_fit


def check_mortality_points(points: Sequence[Sequence[float]]) -> str | None:
    """Why these catalogue mortality points cannot be fitted, or None when they can."""
    if len(points) < 2:
        return "at least 2 mortality points are needed to fit a Weibull shape"
    if any(len(p) != 2 for p in points):
        return "each mortality point is [% of rated life, % surviving]"
    return mortality_problem([float(p[0]) for p in points], [float(p[1]) for p in points])


def fit_mortality_points(
    points: Sequence[Sequence[float]], rated_life_h: float = 1.0, rated_percentile: float = 50.0
) -> MortalityFit:
    """The core fit of catalogue points (with rated_life_h = 1, hours are rated-life fractions)."""
    problem = check_mortality_points(points)
    if problem is not None:
        raise ValueError(problem)
    return core_fit(
        [float(p[0]) for p in points],
        [float(p[1]) for p in points],
        rated_life_h,
        rated_percentile,
    )


class MortalityFitRead(BaseModel):
    """The maker's mortality curve as fitted: both scales, which one is used, and how well."""

    shape: float = Field(description="Weibull beta: the probability-plot slope of the points.")
    used_for_shape: bool = Field(description="False when a catalogue weibull_shape wins.")
    scale_rule: str
    scale_h: float = Field(description="eta from the rated life and this shape (used), hours.")
    curve_scale_h: float = Field(description="eta from the points alone (not used), hours.")
    curve_life_h: float = Field(description="The curve's own life at the rated percentile.")
    rated_life_h: float
    rated_percentile: float
    life_disagreement: float = Field(description="curve_life_h / rated_life_h - 1.")
    r_squared: float
    rms_residual: float = Field(description="On the probability plot, ln(-ln S) units.")
    max_abs_error_pct: float = Field(description="Largest |fitted - read| % surviving.")
    points: list[list[float]] = Field(
        description="[[% of rated life, % surviving read, % surviving on the curve's fit], ...]"
    )
    warnings: list[str]

    @classmethod
    def of(cls, fit: MortalityFit, used_for_shape: bool) -> MortalityFitRead:
        """The read form of a core MortalityFit."""
        return cls(
            shape=fit.shape,
            used_for_shape=used_for_shape,
            scale_rule="points set the shape, the rated life sets the scale",
            scale_h=fit.scale_h,
            curve_scale_h=fit.curve_scale_h,
            curve_life_h=fit.curve_life_h,
            rated_life_h=fit.rated_life_h,
            rated_percentile=fit.rated_percentile,
            life_disagreement=fit.life_disagreement,
            r_squared=fit.r_squared,
            rms_residual=fit.rms_residual,
            max_abs_error_pct=fit.max_abs_error_pct,
            points=[
                [a, b, c]
                for a, b, c in zip(
                    fit.pct_rated_life, fit.pct_surviving, fit.fitted_pct_surviving, strict=True
                )
            ],
            warnings=list(fit.warnings),
        )
