"""The asset register: sites, areas, fixtures and their lamp positions."""
