"""Stock tests."""
