"""Relamp plans per area and per site: group interval, due date, costs and the binding reason."""
