"""Curvewise: a stateless HTTP service that fits, explains and inverts polynomial curves."""

__version__ = "0.1.0"
