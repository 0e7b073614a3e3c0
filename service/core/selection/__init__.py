"""Automatic selection: profile and candidates, backtest ranking, the choice, combination
weights (the plausibility screen is models/plausibility.py, shared with the ETS search)."""
