"""The Forest: the user's front door. Settings, fit, prediction, the out-of-bag results, files, and one-line
hand-offs to the analyses (which document themselves, in :mod:`forestlab.analyses`)."""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Sequence
from concurrent.futures import Executor
from os import PathLike
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ._fitting import grow, more_of_the_same, prepare, regrow
from ._handoffs import HandOffs
from ._members import fitted_attribute, setting, settings_repr
from ._summary import fitted_summary
from .analyses.cases import forest_mean, forest_votes
from .analyses.oob import known_out_of_bag, out_of_bag
from .analyses.results import OutOfBag
from .analyses.view import FittedForest
from .engine.presort import TrainingData
from .engine.sampler import CandidateSampler
from .engine.seeding import check_rng
from .engine.splitter import CartSplitter
from .engine.tree import Tree, tree_values
from .intake.settings import Provenance, Settings, check_settings
from .intake.validation import int_at_least
from .modelfile.stored import StoredForest
from .modelfile.write import write_forest

__all__ = ["Forest"]


def _assembled(settings: Settings, rng: Any, stored: StoredForest | None = None,
               data: TrainingData | None = None) -> Forest:
    """A Forest of valid ``settings`` (the constructor's checks are not repeated); fitted as ``stored`` says,
    with the presorted ``data`` to grow more trees, when given."""
    forest = Forest.__new__(Forest)
    forest._settings, forest._rng = settings, rng
    forest._view = forest._grown = forest._oob = None
    forest._data = data
    if stored is not None:
        forest._view, forest._grown, forest._oob = stored.view, stored.provenance, stored.oob
    return forest


class Forest(HandOffs):
    """Bagged CART trees or a random forest, for classification or regression.

    Every tree is grown on its own bootstrap sample (``trees`` samples of ``sample_size`` cases drawn with
    replacement; Breiman 1996, "Bagging predictors") and, at every split, searches only the candidate
    features its ``sampler`` offers (Breiman 2001, "Random forests"). The in-bag counts of every tree are kept
    in :attr:`inbag`, so out-of-bag analyses need no refitting.

    Parameters
    ----------
    trees : int, default 500
        Number of bootstrap samples, hence trees. A fit refuses (MemoryError) when ``trees * (n + 1000)``
        bytes, the in-bag counts and a floor for the trees, exceed the memory available.
    sampler : CandidateSampler, int, float, {"sqrt", "log2"} or None
        Candidate features per split. None is :class:`RandomSubset` with the common-practice ``m``:
        ``floor(sqrt(p))`` for classification, ``max(1, floor(p/3))`` for regression. :class:`AllFeatures`
        gives plain bagging; a number or name is shorthand for ``RandomSubset(m)``.
    splitter : CartSplitter, {"gini", "entropy", "squared_error"} or None
        Split criterion. None is Gini for classification and squared error for regression.
    min_leaf : float or None
        Smallest leaf, in weighted cases (bootstrap count times case weight times class factor); each child
        of a split must weigh at least this. None is 1 for classification and 5 for regression (common
        practice).
    depth_limit : int or None
        Largest depth of a node (the root has depth 0); None grows until nodes are pure or too light.
    sample_size : int, float or None
        Cases drawn per tree: an int, a fraction of ``n``, or None for ``n`` (with ``balance="classes"``:
        ``K`` times the smallest class size, rounded down to a multiple of the ``K`` classes).
    replace : bool, default True
        Draw with replacement (the bootstrap) or without (subsampling).
    rng : None, int, numpy.random.SeedSequence or numpy.random.Generator
        Source of randomness. One SeedSequence spawns one child per tree, so the same ``rng`` gives the same
        forest, whatever the engine's batching or number of workers.
    task : {"classification", "regression"} or None
        None infers the task: float targets give regression, anything else (ints, strings, bools)
        classification; a splitter's own task takes precedence over the inference.
    workers : int, default 1
        Local processes to grow trees in. With more than one, the training data are put once in shared memory
        and read by every worker (nothing big is copied or pickled per tree). The workers are fresh processes
        started from forestlab's own code, which never run the user's script, notebook or session, so no
        ``if __name__ == "__main__":`` guard is needed; a custom sampler or splitter must come from an
        importable module. They wait, idle, for the session's next fit.
    categorical : sequence of int or str, optional
        Features (positions, or column names) whose values are category labels rather than quantities.
        A split on one sends a subset of its categories left, found exactly for two classes and for
        regression (Breiman et al. 1984, section 9.4; where ``min_leaf`` rules out some subsets, the best
        allowed split of the categories' order, which can fall short of the best allowed subset) and by the
        principal-component ordering of Coppersmith, Hong & Hosking (1999) for more classes. Any real
        values serve as labels (NaN is missing); a category not seen where a split was learned goes where
        that split sends missing values.
    balance : {"classes"} or None
        ``"classes"`` draws each tree's sample stratified, the same number of cases from every class (the
        balanced random forest of Chen, Liaw & Breiman 2004, "Using random forest to learn imbalanced data").
    class_priors : dict, "equal" or None
        Prior probability of each class (Breiman et al. 1984, chapter 4): every root holds the classes in
        these shares, each case of class ``k`` weighing ``pi_k * W / W_k`` times its case weight (``W_k`` the
        total case weight of the class, ``W`` of all) in split scores, ``min_leaf`` and leaf values. A dict
        gives every class a positive prior (normalised to sum to 1), ``"equal"`` gives each ``1 / K``; None
        keeps the shares of the data. For costs of misclassifying each class, give priors in proportion to
        ``cost_k * W_k``.
    executor : concurrent.futures.Executor or None
        Grow the trees on this executor instead: a ``ProcessPoolExecutor`` or ``ThreadPoolExecutor`` of your
        own, or a dask distributed client's ``client.get_executor()`` to fit on a cluster (the data then
        travel once to every cluster worker). Exclusive with ``workers``. Trees go out in blocks; a block
        that fails stops the fit with a :class:`TreeGrowthError` naming its trees.
    progress : None, bool or callable
        ``progress(done, total)`` is called in the fitting thread with the number of trees grown so far,
        once with ``done = 0`` and after every block; raising from it stops the fit. True writes a plain
        progress line to stderr instead.

    Attributes
    ----------
    inbag : ndarray of uint8, shape (trees, n)
        ``inbag[b, i]`` is how often case ``i`` was drawn for tree ``b``; the case is out-of-bag for tree
        ``b`` exactly when it is 0. Read-only.
    classes : ndarray or None
        Class labels in the order of the columns of :meth:`votes`; None for regression.
    task : str
        ``"classification"`` or ``"regression"`` (after fit).
    features : int
        Number of features seen in fit.
    feature_names : tuple of str
        Column names of the data frame seen in fit, or ``("x0", ..., "x{p-1}")`` for an array. A data frame
        given at prediction is matched to them by column name; an array by position.
    case_weights : ndarray of float64, shape (n,), or None
        The ``weights`` given to :meth:`fit` (read-only), None when none were given.
    seed : numpy.random.SeedSequence
        Root seed; tree ``b`` is grown from ``SeedSequence(seed.entropy, spawn_key=seed.spawn_key + (b,))``.
    oob : OutOfBag
        Out-of-bag error, error curve, votes, margins, doubtful cases, strength and correlation, computed
        on first access from the trees and :attr:`inbag`; :meth:`add_trees` grows more trees on the same data.

    Examples
    --------
    >>> import numpy as np, forestlab as fl
    >>> rng = np.random.default_rng(0)
    >>> X = rng.normal(size=(300, 5))
    >>> y = np.where(X[:, 0] + X[:, 1] > 0, "pass", "fail")
    >>> forest = fl.Forest(trees=50, rng=7).fit(X, y)
    >>> forest.classes.tolist()
    ['fail', 'pass']
    >>> forest.votes(X[:2]).sum(axis=1).tolist()
    [1.0, 1.0]
    >>> forest.inbag.shape
    (50, 300)
    """

    inbag = fitted_attribute("inbag", "ndarray of uint8, shape (trees, n): the bootstrap counts (read-only).")
    classes = fitted_attribute("classes", "Class labels in vote-column order (:meth:`votes`); None for regression.")
    task = fitted_attribute("task", '``"classification"`` or ``"regression"``.')
    features = fitted_attribute("features", "Number of features seen in fit.")
    feature_names = fitted_attribute("feature_names", "Column names seen in fit, or ``x0 .. x{p-1}`` for an array.")
    case_weights = fitted_attribute("case_weights", "The ``weights`` given to :meth:`fit` (read-only), or None.")
    seed = fitted_attribute("seed", "Root SeedSequence; tree ``b`` is grown from its child ``b``.")

    def __init__(self, trees: int = 500, *, sampler: CandidateSampler | int | float | str | None = None,
                 splitter: CartSplitter | str | None = None, min_leaf: float | None = None,
                 depth_limit: int | None = None, sample_size: int | float | None = None, replace: bool = True,
                 rng: Any = None, task: str | None = None, workers: int = 1,
                 categorical: Sequence[int | str] | None = None, balance: str | None = None,
                 class_priors: dict | str | None = None, executor: Executor | None = None,
                 progress: bool | Callable[[int, int], object] | None = None) -> None:
        self._settings: Settings = check_settings(trees, sampler, splitter, min_leaf, depth_limit, sample_size,
                                                  replace, task, workers, categorical, balance, class_priors,
                                                  executor, progress)
        check_rng(rng)
        self._rng = rng
        self._view: FittedForest | None = None   # what the analyses read
        self._grown: Provenance | None = None    # how the trees were grown
        self._data: TrainingData | None = None   # the presorted training data, to grow more trees
        self._oob: OutOfBag | None = None

    # ----------------------------------------------------------------------------------------- settings
    trees = setting("trees", "Number of trees (the setting before fit, the number grown after).",
                     lambda f: len(f._view.trees))
    sampler = setting("sampler", "The candidate-feature sampler (task-dependent size resolved after fit).",
                       lambda f: f._grown.rules.sampler)
    splitter = setting("splitter", "The split criterion (the task default after fit when none was given).",
                        lambda f: f._grown.rules.splitter)
    min_leaf = setting("min_leaf", "Smallest leaf weight (the task default after fit when none was given).",
                        lambda f: f._grown.rules.min_leaf)
    depth_limit = setting("depth_limit", "Largest node depth, or None.")
    sample_size = setting("sample_size", "Cases drawn per tree (an int after fit).",
                           lambda f: f._grown.rules.sample_size)
    replace = setting("replace", "Whether bootstrap draws are with replacement.")
    balance = setting("balance", 'How each tree\'s sample is drawn: None (plain bootstrap) or ``"classes"``.')
    class_priors = setting("class_priors", "The class priors setting; after fit, a dict label -> prior of every "
                            "class (None if not set).", lambda f: f._grown.class_priors)

    @property
    def fitted(self) -> bool:
        """True once :meth:`fit` has run."""
        return self._view is not None

    def __repr__(self) -> str:
        """Unfitted: ``Forest(...)`` with the settings that differ from the defaults. Fitted: task, data, trees,
        candidates per split and the out-of-bag error (computed once, when the training data are there)."""
        if self._view is None:
            return settings_repr(self._settings, self._rng)
        self._oob = known_out_of_bag(self._view, self._oob)
        return fitted_summary(self._view, self._grown.rules, self._oob)

    # ----------------------------------------------------------------------------------------- fitting
    def fit(self, X: ArrayLike, y: ArrayLike, weights: ArrayLike | None = None) -> Forest:
        """Grow the forest on predictors ``X`` (n, p) and targets ``y`` (n,); returns the forest.

        ``X`` is an array or a data frame of numeric columns (its column names become
        :attr:`feature_names`). ``weights`` (n,) are optional case weights, finite and non-negative: a
        case drawn ``c`` times weighs ``c * weight`` in every split score, in ``min_leaf``, in the leaf values
        and in the out-of-bag error; a case of weight 0 takes no part in growing. :attr:`inbag` keeps the
        unweighted draw counts. Refitting replaces every tree; a fit that fails leaves the forest as it was.
        """
        view, grown, data = prepare(self._settings, self._rng, X, y, weights)
        trees, inbag = grow(data, grown, self._settings, range(self._settings.trees))
        self._view = dataclasses.replace(view, trees=tuple(trees), inbag=_read_only(inbag))
        self._grown, self._data, self._oob = grown, data, None
        return self

    def add_trees(self, X: ArrayLike, y: ArrayLike, trees: int = 100) -> Forest:
        """Grow ``trees`` more trees on the data the forest was fit on; returns the forest.

        The new trees continue the seed numbering (tree ``b`` from ``SeedSequence(seed.entropy,
        spawn_key=seed.spawn_key + (b,))``), so the result equals one :meth:`fit` with the total number of
        trees and the same ``rng`` (a Generator ``rng`` is not drawn from again: :attr:`seed` is reused).
        :attr:`inbag` grows by ``trees`` rows and :attr:`oob` is recomputed on next access.

        Raises
        ------
        ValueError
            When ``X`` or ``y`` differ from the fit data (checked by a sha256 fingerprint).
        """
        view = self._fitted_view()
        more = int_at_least(trees, "trees", 1)
        more_of_the_same(view, self._grown, X, y)
        first = len(view.trees)
        grown, counts = grow(self._data, self._grown, self._settings, range(first, first + more))
        self._view = dataclasses.replace(view, trees=view.trees + tuple(grown),
                                         inbag=_read_only(np.concatenate([view.inbag, counts])))
        self._settings = dataclasses.replace(self._settings, trees=len(self._view.trees))
        self._oob = None
        return self

    @property
    def oob(self) -> OutOfBag:
        """Out-of-bag results (:class:`OutOfBag`), computed on first access from the trees and :attr:`inbag`.

        Cached until :meth:`fit` or :meth:`add_trees` change the forest. With case weights the errors (and
        their curve, the confusion matrix and the per-class errors) are weighted by them. Warns once with
        :class:`NeverOutOfBagWarning` when some case was never out-of-bag.
        """
        view = self._fitted_view()
        if self._oob is None:
            self._oob = out_of_bag(view, stacklevel=2)
        return self._oob

    # ----------------------------------------------------------------------------------------- inspection
    def tree(self, b: int) -> Tree:
        """Tree ``b`` as flat node arrays (see :class:`Tree`)."""
        trees = self._fitted_view().trees
        if isinstance(b, (bool, np.bool_)) or not isinstance(b, (int, np.integer)):
            raise TypeError(f"`b` must be an int tree index; got {type(b).__name__}")
        if not -len(trees) <= b < len(trees):
            raise IndexError(f"`b` = {b} is out of range for a forest of {len(trees)} trees")
        return trees[b]

    def regrow(self, b: int) -> Tree:
        """Grow tree ``b`` again, alone, from its own seed and the training data; equals :meth:`tree`."""
        self.tree(b)
        return regrow(self._data, self._grown, b % self.trees)

    # ----------------------------------------------------------------------------------------- prediction
    def per_tree(self, X: ArrayLike) -> NDArray:
        """Every tree's prediction for every row: shape ``(trees, n)``.

        Class indices into :attr:`classes` (int64) for classification, values (float64) for regression.
        """
        view = self._fitted_view()
        return tree_values(view.trees, view.coded(X), np.int64 if view.task == "classification" else np.float64)

    def votes(self, X: ArrayLike) -> NDArray[np.float64]:
        """Share of trees voting for each class, shape ``(n, K)`` in the order of :attr:`classes`."""
        if self._fitted_view().task != "classification":
            raise TypeError("`votes` is for classification forests; this forest does regression")
        view = self._fitted_view()
        return forest_votes(view.trees, view.coded(X), self.classes.size)

    def predict(self, X: ArrayLike) -> NDArray:
        """Majority vote (ties to the lowest class index) or the mean of the trees' predictions."""
        if self._fitted_view().task == "classification":
            return self.classes[np.argmax(self.votes(X), axis=1)]
        view = self._fitted_view()
        return forest_mean(view.trees, view.coded(X))

    # ----------------------------------------------------------------------------------------- files
    def save(self, path: str | PathLike, *, include_data: bool = False) -> None:
        """Write the fitted forest to ``path`` (one ``.npz`` file; see docs/file-format.md).

        The write is atomic: a temporary file in the same folder replaces ``path`` only when complete.
        ``include_data=True`` also stores ``X``, ``y`` and the case weights, which a loaded forest needs to
        grow more trees or compute out-of-bag results; without them it still predicts. Read it back with
        :func:`forestlab.load`.
        """
        write_forest(path, self._stored(), include_data=include_data)

    # ----------------------------------------------------------------------------------------- internals
    def _fitted_view(self) -> FittedForest:
        if self._view is None:
            raise RuntimeError("this Forest is not fitted yet; call `fit(X, y)` first")
        return self._view

    def _stored(self) -> StoredForest:
        """The fitted forest as the model file and the exports read it."""
        return StoredForest(self._fitted_view(), self._settings, self._grown, self._oob)

    def _clone_settings(self, rng: Any = None) -> Forest:
        """A new, unfitted Forest with this forest's settings and the given ``rng``."""
        return _assembled(self._settings, rng)


def _read_only(arr: NDArray) -> NDArray:
    arr.flags.writeable = False
    return arr
