"""Spare lamps: storerooms, the stock ledger, demand, reorder and the budget."""
