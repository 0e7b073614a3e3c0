"""Exponential smoothing in the ETS taxonomy: specification, search and fitted model."""
