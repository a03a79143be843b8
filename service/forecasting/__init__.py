"""Forecasts, what-if curves and field fits served from the register and the readings."""
