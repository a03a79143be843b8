"""The invented demo scenario: loading seed_data/ and the demo API key."""
