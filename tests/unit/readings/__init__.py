"""Pure steps of the readings package, without a database."""
