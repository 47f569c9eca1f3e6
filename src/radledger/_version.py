"""The package version (one place; read by provenance tags and the CLI)."""

__version__ = "0.1.0"
