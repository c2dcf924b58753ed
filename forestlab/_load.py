"""``load``: a forest back from its model file (the reading and checking are :mod:`forestlab.modelfile`'s)."""

from __future__ import annotations

from collections.abc import Iterable
from os import PathLike
from typing import Any

from ._fitting import training_data
from ._forest import Forest, _assembled
from .modelfile.check import ModelFileError
from .modelfile.read import inconsistent, read_forest

__all__ = ["load"]


def load(path: str | PathLike, *, components: Iterable[Any] = ()) -> Forest:
    """Read a forest written by :meth:`Forest.save`; refuse anything else with :class:`ModelFileError`.

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    components : iterable of CandidateSampler or CartSplitter instances
        Instances of custom sampler or splitter classes the file names (matched by class name). Built-in
        ones are rebuilt from the file. A custom one not given is kept as a :class:`StoredComponent` and an
        :class:`IncompleteForestWarning` says so: the forest predicts, but cannot grow trees.

    Returns
    -------
    Forest
        Predicts bit-identically to the saved forest and keeps its in-bag counts. Without stored training data
        (``save(path, include_data=True)``) it can predict but not grow trees or compute out-of-bag results.
    """
    stored = read_forest(path, components)
    try:
        data = training_data(stored.view, stored.provenance, stored.settings.balance)
        return _assembled(stored.settings, stored.provenance.seed, stored, data)
    except (ValueError, TypeError, OverflowError) as exc:
        if isinstance(exc, ModelFileError):
            raise
        raise inconsistent(exc) from None
