"""Package version (single source, also used in result provenance)."""

__version__ = "0.1.0"
