"""Retiring sites, areas, fixtures and lamp types that have history."""
