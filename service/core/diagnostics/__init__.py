"""What a series is like: stationarity, autocorrelation, seasonality, differencing, random
walk, and the findings drawn from them."""
