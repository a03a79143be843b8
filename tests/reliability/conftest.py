"""Reliability test settings: the `reliability` package imports matplotlib, so use a
non-GUI backend before anything draws."""

from __future__ import annotations

import os

os.environ.setdefault("MPLBACKEND", "Agg")
