"""Execution: growing blocks of trees here, in worker processes of our own, on any executor or a cluster;
shared memory, failures and clean-up, progress. Internal: the public names are in ``forestlab``."""
