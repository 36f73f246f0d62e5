"""condhint: conditioning and floating-point accuracy hints for Python code."""

__version__ = "0.1.0"
