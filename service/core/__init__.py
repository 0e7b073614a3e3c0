"""The statistics: plain Python on numpy, pandas, scipy and statsmodels, no service concerns."""
