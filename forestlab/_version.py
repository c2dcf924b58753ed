"""The version of forestlab (also written into every model file)."""

__version__ = "0.1.0"
