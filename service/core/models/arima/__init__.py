"""ARIMA: specification, order search, estimation and the ARMA likelihood."""
