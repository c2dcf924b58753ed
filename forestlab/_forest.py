"""The Forest: bootstrap aggregation of level-wise CART trees, with the in-bag counts kept."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Sequence
from concurrent.futures import Executor
from os import PathLike
from typing import Any

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .analyses import dependence as _dependence

from .analyses import importance as _importance

from .analyses import proximity as _proximity
from .engine.bootstrap import balanced_sample_size
from .engine.categories import apply_levels, encode_columns
from .analyses.dependence import Dependence
from .intake.fingerprint import check_same_data, data_fingerprint
from .engine.grow import GrowthRules, grow_batch
from .analyses.importance import Importance
from .analyses.oob import out_of_bag
from .execution.parallel import grow_trees
from .modelfile.persist import MSG_NO_DATA, growth_blocker, save_forest
from .engine.presort import presort
from .analyses.proximity import ProximityMap
from .analyses.results import OutOfBag
from .engine.sampler import CandidateSampler
from .engine.seeding import check_rng, root_seed, tree_seed
from .engine.splitter import CartSplitter, GiniSplitter, SquaredErrorSplitter
from .intake.tables import default_names, match_columns, read_table
from .engine.tree import Tree, leaf_index
from .intake.validation import (Settings, Target, _int_at_least, check_settings, check_splitter_output, check_X,
                          check_y, resolve_categorical)
from .intake.weights import check_weights, class_weight_vector, growth_weights

__all__ = ["Forest"]

# Trees grown together in one batch hold about this many (tree, row) items; batching pays at small n.
BATCH_ITEMS = 65_536
MAX_BATCH = 64

_DEFAULTS = {"trees": 500, "sampler": None, "splitter": None, "min_leaf": None, "depth_limit": None,
             "sample_size": None, "replace": True, "rng": None, "task": None, "workers": 1, "categorical": None,
             "balance": None, "class_weights": None, "executor": None, "progress": None}


class Forest:
    """Bagged CART trees or a random forest, for classification or regression.

    Every tree is grown on its own bootstrap sample (``trees`` samples of ``sample_size`` cases drawn with
    replacement; Breiman 1996, "Bagging predictors") and, at every split, searches only the candidate
    features its ``sampler`` offers (Breiman 2001, "Random forests"). The in-bag counts of every tree are kept
    in :attr:`inbag`, so out-of-bag analyses need no refitting.

    Parameters
    ----------
    trees : int, default 500
        Number of bootstrap samples, hence trees.
    sampler : CandidateSampler, int, float, {"sqrt", "log2"} or None
        Candidate features per split. None is :class:`RandomSubset` with the common-practice ``m``:
        ``floor(sqrt(p))`` for classification, ``max(1, floor(p/3))`` for regression. :class:`AllFeatures`
        gives plain bagging; a number or name is shorthand for ``RandomSubset(m)``.
    splitter : CartSplitter, {"gini", "entropy", "squared_error"} or None
        Split criterion. None is Gini for classification and squared error for regression.
    min_leaf : float or None
        Smallest leaf, in weighted cases (bootstrap count times case weight times class weight); each child
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
        and read by every worker (nothing big is copied or pickled per tree); the processes are started with
        the ``forkserver`` method (``spawn`` where there is none), so a script that fits with
        ``workers > 1`` needs the usual ``if __name__ == "__main__":`` guard.
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
    class_weights : dict, "balanced" or None
        Weight of each class in every sum of the splitter (split scores, ``min_leaf``, leaf values),
        multiplied into the case weights: a dict label -> positive weight (unlisted classes weigh 1), or
        ``"balanced"`` for ``n / (K * n_k)`` with ``n_k`` the cases of class ``k``.
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

    inbag: NDArray[np.uint8]
    classes: NDArray | None
    task: str
    features: int
    feature_names: tuple[str, ...]
    case_weights: NDArray[np.float64] | None
    seed: np.random.SeedSequence

    def __init__(self, trees: int = 500, *, sampler: CandidateSampler | int | float | str | None = None,
                 splitter: CartSplitter | str | None = None, min_leaf: float | None = None,
                 depth_limit: int | None = None, sample_size: int | float | None = None, replace: bool = True,
                 rng: Any = None, task: str | None = None, workers: int = 1,
                 categorical: Sequence[int | str] | None = None, balance: str | None = None,
                 class_weights: dict | str | None = None, executor: Executor | None = None,
                 progress: bool | Callable[[int, int], object] | None = None) -> None:
        self._settings: Settings = check_settings(trees, sampler, splitter, min_leaf, depth_limit, sample_size,
                                                  replace, task, workers, categorical, balance, class_weights,
                                                  executor, progress)
        check_rng(rng)
        self._rng = rng
        self._trees: list[Tree] = []
        self._frame_labels: dict[str, tuple] = {}
        self._oob: OutOfBag | None = None

    # ----------------------------------------------------------------------------------------- settings
    @property
    def trees(self) -> int:
        """Number of trees (the setting before fit, the number grown after)."""
        return len(self._trees) if self._trees else self._settings.trees

    @property
    def sampler(self) -> CandidateSampler:
        """The candidate-feature sampler (task-dependent size resolved after fit)."""
        return getattr(self, "_rules", None).sampler if self.fitted else self._settings.sampler

    @property
    def splitter(self) -> CartSplitter | None:
        """The split criterion (the task default after fit when none was given)."""
        return self._rules.splitter if self.fitted else self._settings.splitter

    @property
    def min_leaf(self) -> float | None:
        """Smallest leaf weight (the task default after fit when none was given)."""
        return self._rules.min_leaf if self.fitted else self._settings.min_leaf

    @property
    def depth_limit(self) -> int | None:
        """Largest node depth, or None."""
        return self._settings.depth_limit

    @property
    def sample_size(self) -> int | float | None:
        """Cases drawn per tree (an int after fit)."""
        return self._rules.sample_size if self.fitted else self._settings.sample_size

    @property
    def replace(self) -> bool:
        """Whether bootstrap draws are with replacement."""
        return self._settings.replace

    @property
    def balance(self) -> str | None:
        """How each tree's sample is drawn: None (plain bootstrap) or ``"classes"`` (class-balanced)."""
        return self._settings.balance

    @property
    def class_weights(self) -> dict | str | None:
        """The class weights setting; after fit, a dict label -> weight of every class (None if not set)."""
        return self._class_weights if self.fitted else self._settings.class_weights

    @property
    def fitted(self) -> bool:
        """True once :meth:`fit` has run."""
        return bool(self._trees)

    def __repr__(self) -> str:
        given = {"trees": self._settings.trees, "sampler": self._settings.sampler,
                 "splitter": self._settings.splitter, "min_leaf": self._settings.min_leaf,
                 "depth_limit": self._settings.depth_limit, "sample_size": self._settings.sample_size,
                 "replace": self._settings.replace, "rng": self._rng, "task": self._settings.task,
                 "workers": self._settings.workers, "categorical": self._settings.categorical,
                 "balance": self._settings.balance, "class_weights": self._settings.class_weights,
                 "executor": self._settings.executor, "progress": self._settings.progress}
        if repr(given["sampler"]) == "RandomSubset(None)":
            given["sampler"] = None
        shown = [f"{k}={v!r}" for k, v in given.items() if v is not _DEFAULTS[k] and v != _DEFAULTS[k]]
        return f"Forest({', '.join(shown)})"

    # ----------------------------------------------------------------------------------------- fitting
    def fit(self, X: ArrayLike, y: ArrayLike, weights: ArrayLike | None = None) -> Forest:
        """Grow the forest on predictors ``X`` (n, p) and targets ``y`` (n,); returns the forest.

        ``X`` is an array or a data frame of numeric columns (its column names become
        :attr:`feature_names`). ``weights`` (n,) are optional case weights, finite and non-negative: a
        case drawn ``c`` times weighs ``c * weight`` in every split score, in ``min_leaf``, in the leaf values
        and in the out-of-bag error; a case of weight 0 takes no part in growing. :attr:`inbag` keeps the
        unweighted draw counts. Refitting replaces every tree; a fit that fails leaves the forest as it was.
        """
        previous = dict(self.__dict__)
        try:
            return self._fit(X, y, weights)
        except BaseException:
            self.__dict__.clear()
            self.__dict__.update(previous)
            raise

    def _fit(self, X: ArrayLike, y: ArrayLike, weights: ArrayLike | None) -> Forest:
        values, names, labels = read_table(X)
        X = check_X(values)
        if X.shape[0] < 2:
            raise ValueError(f"`X` must have at least 2 rows to grow a tree; got {X.shape[0]}")
        target = check_y(y, X.shape[0], self._task_for())
        fingerprint = data_fingerprint(X, target)
        case_weights = check_weights(weights, X.shape[0])
        self._check_class_options(target)
        rules = self._resolve_rules(target, X.shape)
        stats = check_splitter_output(rules.splitter, target)
        columns = resolve_categorical(self._settings.categorical, X.shape[1],
                                      None if names is None else list(names), frame=labels)
        X, self._levels = encode_columns(X, columns)
        categories = np.zeros(X.shape[1], dtype=np.int64)
        for j, values in self._levels.items():
            categories[j] = values.size
        classes = 0 if target.classes is None else target.classes.size
        class_vector = self._class_vector(target)
        self._data = presort(X, target.values, stats, classes, categories,
                             growth_weights(case_weights, class_vector, target.values),
                             target.values if self._settings.balance else None)
        del stats  # presort keeps its own weighted copy
        self._categories = self._data.categories
        self._rules = rules
        self.task = target.task
        self.classes = target.classes
        self.features = X.shape[1]
        self.feature_names = names if names is not None else default_names(X.shape[1])
        self._frame_labels = labels
        self.case_weights = case_weights
        self._class_weights = None if class_vector is None else dict(zip(target.classes.tolist(),
                                                                         class_vector.tolist()))
        self._target = target
        self.seed = root_seed(self._rng)
        self._fingerprint = fingerprint
        self._oob = None
        trees, inbag = self._grow(range(self._settings.trees))
        self._trees = trees
        self.inbag = inbag
        self.inbag.flags.writeable = False
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
        self._check_fitted()
        more = _int_at_least(trees, "trees", 1)
        X = check_X(match_columns(X, self.feature_names, labels=self._frame_labels), features=self.features)
        target = check_y(y, X.shape[0], self.task)
        check_same_data(self._fingerprint, self._data.X.shape, X, target)
        first = len(self._trees)
        grown, counts = self._grow(range(first, first + more))
        self._trees = self._trees + grown
        self.inbag = np.concatenate([self.inbag, counts])
        self.inbag.flags.writeable = False
        self._settings = dataclasses.replace(self._settings, trees=len(self._trees))
        self._oob = None
        return self

    def _clone_settings(self, rng: Any = None) -> Forest:
        """A new, unfitted Forest with this forest's settings and the given ``rng``."""
        clone = Forest.__new__(Forest)
        clone._settings = self._settings
        clone._rng = rng
        clone._trees = []
        clone._oob = None
        return clone

    def _task_for(self) -> str | None:
        s = self._settings
        if s.task is not None:
            return s.task
        return s.splitter.task if s.splitter is not None else None

    def _check_class_options(self, target: Target) -> None:
        s = self._settings
        if target.task == "regression" and (s.balance is not None or s.class_weights is not None):
            raise ValueError("`balance` and `class_weights` are for classification, but the task is regression")

    def _class_vector(self, target: Target) -> NDArray[np.float64] | None:
        spec = self._settings.class_weights
        return None if spec is None else class_weight_vector(spec, target.classes, target.values)

    def _resolve_rules(self, target: Target, shape: tuple[int, int]) -> GrowthRules:
        s = self._settings
        n, p = shape
        splitter = s.splitter
        if splitter is None:
            splitter = GiniSplitter() if target.task == "classification" else SquaredErrorSplitter()
        elif splitter.task != target.task:
            raise ValueError(f"`splitter` {splitter!r} is for {splitter.task}, but the task is {target.task}")
        min_leaf = s.min_leaf if s.min_leaf is not None else (1.0 if target.task == "classification" else 5.0)
        size = s.sample_size
        if s.balance is not None:
            size = balanced_sample_size(size, target.values, s.replace)
        size = n if size is None else (max(1, math.floor(size * n)) if isinstance(size, float) else size)
        if not s.replace and size > n:
            raise ValueError(f"`sample_size` = {size} exceeds the {n} cases available without replacement")
        return GrowthRules(sampler=s.sampler.resolve(p, target.task), splitter=splitter, min_leaf=min_leaf,
                           depth_limit=s.depth_limit, sample_size=int(size), replace=s.replace)

    def _grow(self, tree_ids: range) -> tuple[list[Tree], NDArray[np.uint8]]:
        """Grow the trees with the given spawn indices, in batches sized by the number of cases."""
        blocker = growth_blocker(self)
        if blocker is not None or self._data is None:
            raise RuntimeError(blocker or MSG_NO_DATA)
        batch = max(1, min(MAX_BATCH, BATCH_ITEMS // self._data.rows))
        s = self._settings
        return grow_trees(self._data, self._rules, self.seed, tree_ids, batch, workers=s.workers,
                          executor=s.executor, progress=s.progress)

    def _grow_checked(self, ids: list[int], counts: list[NDArray[np.uint8]]) -> list[Tree]:
        """``grow_batch`` for the given trees (their in-bag counts appended to ``counts``)."""
        blocker = growth_blocker(self)
        if blocker is not None or self._data is None:
            raise RuntimeError(blocker or MSG_NO_DATA)
        grown, inbag = grow_batch(self._data, self._rules, [tree_seed(self.seed, b) for b in ids])
        counts.append(inbag)
        return grown

    # ----------------------------------------------------------------------------------------- out-of-bag
    @property
    def oob(self) -> OutOfBag:
        """Out-of-bag results (:class:`OutOfBag`), computed on first access from the trees and :attr:`inbag`.

        Cached until :meth:`fit` or :meth:`add_trees` change the forest. With case weights the errors (and
        their curve, the confusion matrix and the per-class errors) are weighted by them. Warns once with
        :class:`NeverOutOfBagWarning` when some case was never out-of-bag.
        """
        self._check_fitted()
        if self._oob is None and self._data is None:
            raise RuntimeError(MSG_NO_DATA)
        if self._oob is None:
            self._oob = out_of_bag(self._trees, self.inbag, self._data.X, self._target, stacklevel=2,
                                   weights=self.case_weights)
        return self._oob

    # ----------------------------------------------------------------------------------------- inspection
    def tree(self, b: int) -> Tree:
        """Tree ``b`` as flat node arrays (see :class:`Tree`)."""
        self._check_fitted()
        if isinstance(b, (bool, np.bool_)) or not isinstance(b, (int, np.integer)):
            raise TypeError(f"`b` must be an int tree index; got {type(b).__name__}")
        if not -len(self._trees) <= b < len(self._trees):
            raise IndexError(f"`b` = {b} is out of range for a forest of {len(self._trees)} trees")
        return self._trees[b]

    def regrow(self, b: int) -> Tree:
        """Grow tree ``b`` again, alone, from its own seed and the training data; equals :meth:`tree`."""
        self.tree(b)
        b = b % len(self._trees)
        return self._grow_checked([b], [])[0]

    # ----------------------------------------------------------------------------------------- prediction
    def per_tree(self, X: ArrayLike) -> NDArray:
        """Every tree's prediction for every row: shape ``(trees, n)``.

        Class indices into :attr:`classes` (int64) for classification, values (float64) for regression.
        """
        X = self._check_predict_X(X)
        out = np.empty((len(self._trees), X.shape[0]), dtype=np.int64 if self.task == "classification" else None)
        missing = bool(np.isnan(X).any())
        for b, tree in enumerate(self._trees):  # class indices are whole numbers: exact in either type
            out[b] = np.take(tree.value, leaf_index(tree, X, missing), mode="clip")
        return out

    def votes(self, X: ArrayLike) -> NDArray[np.float64]:
        """Share of trees voting for each class, shape ``(n, K)`` in the order of :attr:`classes`."""
        self._check_fitted()
        if self.task != "classification":
            raise TypeError("`votes` is for classification forests; this forest does regression")
        return _vote_shares(self.per_tree(X), self.classes.size)

    def predict(self, X: ArrayLike) -> NDArray:
        """Majority vote (ties to the lowest class index) or the mean of the trees' predictions."""
        self._check_fitted()
        if self.task == "classification":
            return self.classes[np.argmax(self.votes(X), axis=1)]
        return self.per_tree(X).mean(axis=0)

    # ----------------------------------------------------------------------------------------- analyses
    def importance(self, kind: str = "permutation", *, X: ArrayLike | None = None, y: ArrayLike | None = None,
                   groups: Any = None, names: Sequence[str] | None = None, rng: Any = None) -> Importance:
        """Importance of every feature, or of groups of features, as a sorted-printing :class:`Importance`.

        ``kind="permutation"`` (Breiman 2001, "Random forests", section 10): for every tree and feature, the
        rise in the tree's error (misclassification rate or mean squared error) on its out-of-bag cases when
        the feature's values are shuffled among those cases; ``scores`` is the mean over trees, ``spread`` the
        standard deviation, ``z = scores / (spread / sqrt(trees))``. With ``X`` and ``y`` (held-out cases),
        every tree is scored on all of them instead. ``groups`` (a mapping of name to columns, or a list of
        column lists) shuffles a set of correlated columns together, rows kept aligned, and scores the set.

        ``kind="impurity"``: every tree's weighted impurity decrease per feature as a share of the tree's
        total, averaged over trees (the scores sum to 1). Cheap, but biased: it favours features with many
        distinct values (many candidate thresholds) even when they are pure noise (Strobl, Boulesteix,
        Zeileis & Hothorn 2007, "Bias in random forest variable importance measures: illustrations, sources
        and a solution", BMC Bioinformatics 8:25). Prefer the permutation kind to compare features of
        different types.

        ``names`` label the features (default :attr:`feature_names`); ``rng`` seeds the shuffles (tree ``b``
        draws from its own child of the seed, so results do not depend on the order of work).
        """
        return _importance.importance(self, kind, X=X, y=y, groups=groups, names=names, rng=rng)

    def partial_dependence(self, feature: int | tuple[int, int], grid: ArrayLike | None = None, *,
                           X: ArrayLike | None = None, label: Any = None, ice: bool = False,
                           points: int = 25) -> Dependence:
        """Partial dependence on one feature, or on a pair (an interaction surface), as :class:`Dependence`.

        Friedman (2001), "Greedy function approximation", section 8.2: the forest's prediction averaged over
        the cases (the training cases, or ``X``) with ``feature`` set to each ``grid`` value. For
        classification, the share of trees voting ``label`` (default: the second class of a two-class
        forest). ``grid`` defaults to the distinct values, or ``points`` evenly spaced quantiles, of the
        feature; for a pair, pass one array (or None) per feature. ``ice=True`` keeps every case's curve
        (Goldstein, Kapelner, Bleich & Pitkin 2015, "Peeking inside the black box").
        """
        return _dependence.partial_dependence(self, feature, grid, X=X, label=label, ice=ice, points=points)

    def proximity(self, oob: bool = True, *, X: ArrayLike | None = None, block: int | None = None) -> NDArray:
        """Share of trees in which two cases land in the same leaf: an (n, n) float64 array.

        With ``oob=True`` (training cases only) a tree counts for a pair only when both cases are out-of-bag
        for it; pairs never out-of-bag together are NaN (with an :class:`OverlapWarning`). The diagonal is 1.
        Rows are computed ``block`` at a time from a sparse leaf-membership matrix, so the working memory
        beyond the (n, n) result stays near ``trees x n``; n = 10 000 needs the 800 MB result and little more.
        """
        return _proximity.proximity(self, oob, X=X, block=block)

    def outlyingness(self, oob: bool = True, *, X: ArrayLike | None = None, y: ArrayLike | None = None,
                     block: int | None = None) -> NDArray[np.float64]:
        """Outlier score of every case within its class (Breiman & Cutler's measure), shape (n,).

        Raw score ``n / sum_k prox(i, k)^2`` over the other cases ``k`` of case ``i``'s class (all cases for
        regression), then standardised within each class: minus the class median, divided by the class
        median absolute deviation. Large values (common practice: above about 10) mark cases unlike the rest
        of their class. Streams proximity blocks; the (n, n) matrix is never stored.
        """
        return _proximity.outlyingness(self, oob, X=X, y=y, block=block)

    def proximity_map(self, dims: int = 2, *, oob: bool = True, X: ArrayLike | None = None) -> ProximityMap:
        """Map of the cases: classical multidimensional scaling of ``1 - proximity`` (:class:`ProximityMap`)."""
        return _proximity.proximity_map(self, dims, oob=oob, X=X)

    def _check_fitted(self) -> None:
        if not self._trees:
            raise RuntimeError("this Forest is not fitted yet; call `fit(X, y)` first")

    def _check_predict_X(self, X: ArrayLike) -> NDArray[np.float64]:
        self._check_fitted()
        return apply_levels(check_X(match_columns(X, self.feature_names, labels=self._frame_labels),
                                    features=self.features), self._levels)

    # ----------------------------------------------------------------------------------------- files
    def save(self, path: str | PathLike, *, include_data: bool = False) -> None:
        """Write the fitted forest to ``path`` (one ``.npz`` file; see docs/file-format.md).

        The write is atomic: a temporary file in the same folder replaces ``path`` only when complete.
        ``include_data=True`` also stores ``X``, ``y`` and the case weights, which a loaded forest needs to
        grow more trees or compute out-of-bag results; without them it still predicts. Read it back with
        :func:`forestlab.load`.
        """
        self._check_fitted()
        save_forest(self, path, include_data=include_data)


def _vote_shares(per_tree: NDArray[np.int64], classes: int) -> NDArray[np.float64]:
    """Share of rows of ``per_tree`` (trees, n) equal to each class: shape (n, classes)."""
    trees, n = per_tree.shape
    flat = (np.arange(n) * classes)[None, :] + per_tree
    counts = np.bincount(flat.ravel(), minlength=n * classes).reshape(n, classes)
    return counts / trees
