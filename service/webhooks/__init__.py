"""Signed webhooks: subscriptions, an outbox filled from the change feed, delivery."""
