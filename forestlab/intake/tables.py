"""Tables in, numbers out: data frames and arrays become a float matrix plus feature names.

pandas stays optional. A data frame is recognised without importing pandas: through
``sys.modules.get("pandas")`` when pandas is loaded, and otherwise by duck typing (an object with
``columns`` and ``to_numpy``). Arrays get the names ``x0 .. x{p-1}``.

A pandas column of category dtype is a categorical predictor: it is read as the codes of its categories
(NaN for a missing value), and the category labels seen in fit are kept so that a frame at predict time is
coded by label, whatever its own category order; a label not seen in fit becomes NaN.
"""

from __future__ import annotations

import sys
from collections import Counter
from typing import Any

import numpy as np

__all__ = ["default_names", "is_frame", "read_table", "match_columns"]

MSG_CATEGORICAL = (
    "`{name}` has non-numeric column(s) {columns} (object, string or date dtype); forestlab reads numbers and "
    "pandas category columns. Convert label columns with `.astype(\"category\")`, or encode them as numbers "
    "(one number per category, NaN for a missing one) and name them in `categorical=`"
)


def default_names(features: int) -> tuple[str, ...]:
    """Feature names given to the columns of an array: ``("x0", "x1", ...)``."""
    return tuple(f"x{j}" for j in range(features))


def is_frame(X: Any) -> bool:
    """True for a pandas data frame, or any object that looks like one (``columns`` and ``to_numpy``)."""
    pandas = sys.modules.get("pandas")
    if pandas is not None and isinstance(X, pandas.DataFrame):
        return True
    return not isinstance(X, np.ndarray) and hasattr(X, "columns") and callable(getattr(X, "to_numpy", None))


def _column_names(X: Any, name: str) -> tuple[str, ...]:
    names = tuple(str(c) for c in list(X.columns))
    if len(set(names)) != len(names):
        repeated = sorted(c for c, k in Counter(names).items() if k > 1)
        raise ValueError(f"`{name}` has repeated column names {repeated}; every column needs its own name")
    return names


def _is_numeric(dtype: Any) -> bool:
    """Numeric or bool column dtypes (NumPy or pandas extension dtypes); categories and strings are not."""
    if isinstance(dtype, np.dtype):
        return dtype.kind in "biuf"
    pandas = sys.modules.get("pandas")
    if pandas is not None:
        return bool(pandas.api.types.is_numeric_dtype(dtype) or pandas.api.types.is_bool_dtype(dtype))
    return getattr(dtype, "kind", "O") in "biuf"


def _category_labels(X: Any, names: tuple[str, ...]) -> dict[str, tuple]:
    """Labels of the frame's pandas category columns, by column name."""
    pandas = sys.modules.get("pandas")
    dtypes = getattr(X, "dtypes", None)
    if pandas is None or dtypes is None:
        return {}
    return {c: tuple(d.categories.tolist()) for c, d in zip(names, list(dtypes))
            if isinstance(d, pandas.CategoricalDtype)}


def _coded(X: Any, labels: dict[str, tuple]) -> Any:
    """The frame with each labelled column replaced by float codes of ``labels`` (NaN: missing or unseen)."""
    if not labels:
        return X
    pandas = sys.modules["pandas"]
    X = X.copy()
    for c, known in labels.items():
        codes = pandas.Index(list(known)).get_indexer(X[c].astype(object)).astype(np.float64)
        codes[codes < 0] = np.nan
        X[c] = codes
    return X


def _frame_values(X: Any, name: str, names: tuple[str, ...]) -> Any:
    """The frame's values as a float array, refusing non-numeric columns with the list of them."""
    dtypes = getattr(X, "dtypes", None)
    if dtypes is not None and hasattr(dtypes, "__len__") and len(dtypes) == len(names):
        bad = [c for c, d in zip(names, list(dtypes)) if not _is_numeric(d)]
        if bad:
            raise TypeError(MSG_CATEGORICAL.format(name=name, columns=bad))
    try:
        return X.to_numpy(dtype=np.float64, na_value=np.nan)
    except TypeError:
        values = np.asarray(X.to_numpy())
    except ValueError as exc:
        raise TypeError(f"`{name}` could not be read as numbers: {exc}") from None
    if values.dtype == object or values.dtype.kind not in "biuf":
        raise TypeError(MSG_CATEGORICAL.format(name=name, columns=list(names)))
    return values


def read_table(X: Any, name: str = "X") -> tuple[Any, tuple[str, ...] | None, dict[str, tuple]]:
    """Split ``X`` into its values, its column names (None for arrays) and its category columns' labels."""
    if not is_frame(X):
        return X, None, {}
    names = _column_names(X, name)
    labels = _category_labels(X, names)
    return _frame_values(_coded(X, labels), name, names), names, labels


def match_columns(X: Any, feature_names: tuple[str, ...], name: str = "X",
                  labels: dict[str, tuple] | None = None) -> Any:
    """Values of ``X`` with columns in training order: a data frame by column name, an array by position.

    Columns named in ``labels`` (the category labels seen in fit) are coded by label.
    """
    if not is_frame(X):
        return X
    names = _column_names(X, name)
    if names != feature_names:
        missing = [c for c in feature_names if c not in set(names)]
        extra = [c for c in names if c not in set(feature_names)]
        if missing or extra:
            parts = ([f"missing {missing}"] if missing else []) + ([f"unexpected {extra}"] if extra else [])
            raise ValueError(
                f"`{name}` columns must be the {len(feature_names)} features seen in fit; "
                f"{' and '.join(parts)}"
            )
        columns = list(X.columns)
        X = X[[columns[names.index(c)] for c in feature_names]]
        X.columns = list(feature_names)
    return _frame_values(_coded(X, labels or {}), name, feature_names)
