"""The package version, in a leaf module so that any module can import it without a cycle."""

__version__ = "0.1.0"
