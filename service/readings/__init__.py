"""Burn-hour records, voltage readings and each lamp position's age."""
