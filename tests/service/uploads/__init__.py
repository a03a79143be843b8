"""Tests of the upload pipeline (service tier)."""
