"""Automatic selection: profile and candidates, backtest ranking, the choice, combination
weights and the plausibility screen."""
