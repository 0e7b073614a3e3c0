"""The series as the core sees it: frequency, parsing, gap filling, regressors."""
