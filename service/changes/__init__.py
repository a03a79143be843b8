"""The change feed: every write to a tracked table, in the order it became visible."""
