"""The analyses that read a fitted forest: out-of-bag results, cross-validation, importance, dependence and
proximity. Internal: import the public names from ``forestlab``."""
