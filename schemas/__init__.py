"""The wire contract as marshmallow schemas. Imports nothing from ``service``."""
