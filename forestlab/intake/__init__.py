"""Data intake: tables and frames, category coding, argument and data validation, weights, fingerprints.
Internal: import the public names from ``forestlab``."""
