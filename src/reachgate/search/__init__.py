"""Placement search: where the scenario fits in the cell (DESIGN §10)."""
