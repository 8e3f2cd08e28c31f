"""Python client for the Curvewise service."""
