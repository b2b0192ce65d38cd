"""The version of eigengate, in one place at the bottom layer (the package re-exports it)."""

__version__ = "0.1.0"
