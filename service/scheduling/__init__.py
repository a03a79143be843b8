"""The weekly run: APScheduler set-up, run records, the single-runner lock per site."""
