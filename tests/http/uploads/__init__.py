"""Tests of the upload pipeline (http tier)."""
