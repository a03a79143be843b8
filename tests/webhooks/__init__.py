"""Webhook tests."""
