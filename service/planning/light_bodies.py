"""Response bodies of the maintained-light view and the fit-bounds view (planning/light_view.py)."""

from __future__ import annotations

from service.planning.light_view import FitBounds, MaintainedView, across_bounds, maintained_view
from service.planning.schemas import CleaningOnlyRead, FitBoundsRead, MaintainedLightRead
from service.planning.service import TypeGroup


def maintained_read(g: TypeGroup, view: MaintainedView | None = None) -> MaintainedLightRead:
    """The maintained-light body of one lamp type's plan (view: computed already)."""
    v = view or maintained_view(g.model, g.costs, g.cond, g.group)
    d = g.cond.dirt
    c = v.cleaning_only
    return MaintainedLightRead(
        luminaire_type=d.luminaire_type if d else None,
        dirt_environment=d.environment if d else None,
        cleaning_interval_months=(
            d.cleaning_interval_years * 12.0 if d and d.cleaning_interval_years else None
        ),
        relamp_includes_cleaning=v.cleaning_in_group_visit,
        source=v.source,
        voltage_light_factor=v.light_factor,
        light_at_interval=v.light_at_interval,
        cleaning_labour_per_position=v.cleaning_labour_per_position,
        cleaning_only=CleaningOnlyRead(**c.__dict__) if c else None,
    )


def bounds_read(g: TypeGroup, per_year_h: float, found: FitBounds | None = None) -> FitBoundsRead:
    """The plan's interval and yearly saving at the lower and upper scale bound (found:
    computed already)."""
    b = found or across_bounds(g.model, g.costs, g.cond, g.curve)
    lo, hi = b.lower.plan, b.upper.plan
    return FitBoundsRead(
        confidence=b.confidence,
        basis=b.basis,
        scale_bounds_h=b.scale_bounds_h,
        interval_h_at_lower=lo.interval_h,
        interval_h_at_upper=hi.interval_h,
        binding_at_lower=lo.binding,
        binding_at_upper=hi.binding,
        yearly_saving_at_lower=lo.saving_rate * per_year_h * g.positions,
        yearly_saving_at_upper=hi.saving_rate * per_year_h * g.positions,
    )
