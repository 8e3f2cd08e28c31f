"""Compiled (numba) loops of the polynomial family's single-series fit."""
