"""scanloom: a test-program compiler for IEEE 1149.1 boundary-scan board tests."""

__version__ = "0.1.0"

__all__ = ["__version__"]
