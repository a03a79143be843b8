"""Tests of the upload pipeline (unit tier)."""
