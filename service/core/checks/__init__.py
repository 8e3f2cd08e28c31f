"""Residual checks shared by every family: per-point forms, Shapiro-Wilk, Breusch-Pagan,
Durbin-Watson, lack of fit and trust flags. They take residuals, leverages, the parameter
count and sigma, never a family's internals."""
