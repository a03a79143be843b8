"""LampKeeper: lamp register, failure forecasts and group-relamp planning."""

__version__ = "0.1.0"
