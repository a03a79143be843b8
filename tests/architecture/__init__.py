"""Tests of the package structure: layers and cycles."""
