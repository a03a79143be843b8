"""Retiring sites, areas, fixtures and lamp types that have history."""

# Declares the history tables to the register's delete checks on first import of the package.
from service.retirement import history as history
