"""Dynamic harmonic regression: specification (family), Fourier terms, ARIMA errors, fitted."""
