"""How forecasts are scored: rolling origins, backtests, accuracy measures, calibration."""
