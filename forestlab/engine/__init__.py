"""The growth engine: presort, bootstrap, seeding, candidate samplers, splitters, the level-wise split search
and its fast paths, and the flat ``Tree``. Knows nothing of data frames, analyses, files or processes; see
``ENGINE.md`` beside this file. Internal: import the public names from ``forestlab``."""
