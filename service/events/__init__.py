"""Burnout reports and lamp removals, which become survival observations."""
