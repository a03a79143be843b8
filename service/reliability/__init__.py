"""The numeric core: pure functions on numpy arrays and small frozen dataclasses.

No web framework, no database: everything here can be called from a notebook.

- weibull      survival, hazard, percentiles, conditional failure; scale from a rated life
- mortality    Weibull shape from a maker's mortality curve (probability plot), rated-life scale
- conditions   supply voltage and switching as life, light and power factors
- lumen        lamp lumen depreciation curves, technology defaults
- tm21         IES TM-21 projection of LED lumen maintenance from LM-80-style data
- renewal      the renewal function M(t) and its density, for spot replacement counts
- replacement  block (group) replacement intervals and their cost rates
- fitting      Weibull MLE with censoring, WeiBayes, Kaplan-Meier, field-or-catalogue rule
- fleet        all of the above over whole fleets of lamp positions at once

Units: hours are burn hours, voltages volts, light as a fraction of initial lumens.
"""
