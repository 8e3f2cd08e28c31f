"""Curvewise: a stateless HTTP service that fits, explains and inverts curves of every family."""

__version__ = "0.1.0"
