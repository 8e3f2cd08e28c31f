"""Nonlinear least squares: model expressions, solver, inference."""
