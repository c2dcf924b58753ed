"""What every generator shares: argument checks and the random source."""

from __future__ import annotations

import numbers
from typing import Union

import numpy as np

__all__ = ["RandomSource", "Sample", "as_generator", "check_int", "check_noise", "gaussian_draws"]


#: What ``rng`` accepts: anything `numpy.random.default_rng` takes.
RandomSource = Union[int, np.random.SeedSequence, np.random.Generator, None]


Sample = tuple[np.ndarray, np.ndarray]


def check_int(value: object, name: str, minimum: int, why: str = "") -> int:
    """Return ``value`` as an int, or raise if it is not an integer >= ``minimum``."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        kind = type(value).__name__
        raise TypeError(f"`{name}` must be an integer, got {kind} {value!r}.")
    if value < minimum:
        raise ValueError(f"`{name}` must be at least {minimum}{why}, got {value}.")
    return int(value)


def check_noise(value: object) -> float:
    """Return the noise standard deviation as a float; it must be finite and >= 0."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        kind = type(value).__name__
        raise TypeError(f"`noise` must be a real number, got {kind} {value!r}.")
    if not (np.isfinite(value) and value >= 0):
        raise ValueError(
            f"`noise` must be a finite standard deviation >= 0, got {value}."
        )
    return float(value)


def as_generator(rng: object) -> np.random.Generator:
    """Normalise ``rng`` with `numpy.random.default_rng`, naming it in any error."""
    try:
        return np.random.default_rng(rng)  # type: ignore[arg-type]
    except (TypeError, ValueError) as error:
        raise type(error)(
            "`rng` must be None, a non-negative int (or a sequence of them), a numpy"
            f" SeedSequence or a numpy Generator, got {type(rng).__name__} {rng!r}."
        ) from None


def gaussian_draws(n: object, dims: object, rng: object) -> tuple:
    """Validate, then draw labels and standard normal noise, in that order."""
    n, dims = check_int(n, "n", 1), check_int(dims, "dims", 1)
    generator = as_generator(rng)
    y = generator.integers(0, 2, size=n, dtype=np.int64)
    noise = generator.standard_normal((n, dims))
    return y, noise, 2.0 / np.sqrt(dims), generator
