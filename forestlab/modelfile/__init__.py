"""The model file: writing a fitted forest, reading it back, and checking untrusted contents (layout in
``docs/file-format.md``). Internal: import ``forestlab.load`` and ``Forest.save``."""
