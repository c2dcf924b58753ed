"""The regression problems of Friedman (1991): #1, and the circuit problems #2 and #3."""

from __future__ import annotations

import numpy as np

from ._draws import RandomSource, Sample, as_generator, check_int, check_noise

__all__ = ["friedman1", "friedman2", "friedman3"]


_CIRCUIT_LOW = np.array([0.0, 40.0 * np.pi, 0.0, 1.0])


_CIRCUIT_HIGH = np.array([100.0, 560.0 * np.pi, 1.0, 11.0])


def friedman1(
    n: int, *, dims: int = 10, noise: float = 1.0, rng: RandomSource = None
) -> Sample:
    """Draw Friedman's first regression problem: 5 active inputs of ``dims`` uniform.

    x ~ U[0, 1]^dims and
    ``y = 10 sin(pi x1 x2) + 20 (x3 - 0.5)^2 + 10 x4 + 5 x5 + e`` with
    e ~ N(0, noise^2); inputs x6 .. x_dims do not enter y. The noise-free response
    has variance about 23.86 (Monte Carlo), so the default noise is about 4% of the
    total variance.

    Parameters
    ----------
    n : int
        Number of cases, at least 1.
    dims : int, default 10
        Number of inputs, at least 5.
    noise : float, default 1.0
        Standard deviation of the Gaussian noise, finite and >= 0.
    rng : None, int, numpy.random.SeedSequence or numpy.random.Generator
        Source of randomness, normalised with `numpy.random.default_rng`. The noise
        is drawn even when ``noise=0``, so a seed gives the same X at every noise.

    Returns
    -------
    X : ndarray of float64, shape (n, dims)
    y : ndarray of float64, shape (n,)

    References
    ----------
    J. H. Friedman (1991). Multivariate adaptive regression splines. Ann. Statist.
    19, 1-67; L. Breiman (1996). Bagging predictors. Machine Learning 24, 123-140.

    Examples
    --------
    >>> from forestlab.synthetic import friedman1
    >>> X, y = friedman1(200, rng=2)
    >>> X.shape, y.shape, y.dtype
    ((200, 10), (200,), dtype('float64'))
    """
    n, dims = check_int(n, "n", 1), check_int(dims, "dims", 5, " (y uses x1 .. x5)")
    noise = check_noise(noise)
    generator = as_generator(rng)
    X = generator.random((n, dims))
    x1, x2, x3, x4, x5 = X[:, :5].T
    signal = (
        10.0 * np.sin(np.pi * x1 * x2) + 20.0 * (x3 - 0.5) ** 2 + 10.0 * x4 + 5.0 * x5
    )
    return X, signal + noise * generator.standard_normal(n)


def _circuit_draws(n: object, noise: object, rng: object) -> tuple:
    """Validate, then draw the inputs shared by `friedman2` and `friedman3`."""
    n, noise = check_int(n, "n", 1), check_noise(noise)
    generator = as_generator(rng)
    X = _CIRCUIT_LOW + (_CIRCUIT_HIGH - _CIRCUIT_LOW) * generator.random((n, 4))
    reactance = X[:, 1] * X[:, 2] - 1.0 / (X[:, 1] * X[:, 3])  # x2 x3 - 1/(x2 x4)
    return X, reactance, noise * generator.standard_normal(n)


def friedman2(n: int, *, noise: float = 125.0, rng: RandomSource = None) -> Sample:
    """Draw Friedman's second regression problem (impedance of an AC circuit).

    x1 ~ U[0, 100], x2 ~ U[40 pi, 560 pi], x3 ~ U[0, 1], x4 ~ U[1, 11],
    independently, and ``y = sqrt(x1^2 + (x2 x3 - 1 / (x2 x4))^2) + e`` with
    e ~ N(0, noise^2). The default noise gives a signal-to-noise standard deviation
    ratio of about 3:1 (noise-free sd about 378.8 by Monte Carlo).

    Parameters
    ----------
    n : int
        Number of cases, at least 1.
    noise : float, default 125.0
        Standard deviation of the Gaussian noise, finite and >= 0.
    rng : None, int, numpy.random.SeedSequence or numpy.random.Generator
        Source of randomness, normalised with `numpy.random.default_rng`. The noise
        is drawn even when ``noise=0``.

    Returns
    -------
    X : ndarray of float64, shape (n, 4)
    y : ndarray of float64, shape (n,)

    References
    ----------
    J. H. Friedman (1991). Multivariate adaptive regression splines. Ann. Statist.
    19, 1-67; L. Breiman (1996). Bagging predictors. Machine Learning 24, 123-140.

    Examples
    --------
    >>> from forestlab.synthetic import friedman2
    >>> X, y = friedman2(200, rng=2)
    >>> X.shape, bool((X[:, 3] >= 1).all())
    ((200, 4), True)
    """
    X, reactance, error = _circuit_draws(n, noise, rng)
    return X, np.hypot(X[:, 0], reactance) + error


def friedman3(n: int, *, noise: float = 0.1, rng: RandomSource = None) -> Sample:
    """Draw Friedman's third regression problem (phase angle of an AC circuit).

    The inputs are those of `friedman2` and
    ``y = atan((x2 x3 - 1 / (x2 x4)) / x1) + e`` with e ~ N(0, noise^2), computed as
    ``arctan2(x2 x3 - 1 / (x2 x4), x1)``: equal for x1 > 0 and the limit +-pi/2 at
    x1 = 0. The default noise gives a signal-to-noise standard deviation ratio of
    about 3:1 (noise-free sd about 0.3165 by Monte Carlo).

    Parameters
    ----------
    n : int
        Number of cases, at least 1.
    noise : float, default 0.1
        Standard deviation of the Gaussian noise, finite and >= 0.
    rng : None, int, numpy.random.SeedSequence or numpy.random.Generator
        Source of randomness, normalised with `numpy.random.default_rng`. The noise
        is drawn even when ``noise=0``.

    Returns
    -------
    X : ndarray of float64, shape (n, 4)
    y : ndarray of float64, shape (n,)

    References
    ----------
    J. H. Friedman (1991). Multivariate adaptive regression splines. Ann. Statist.
    19, 1-67; L. Breiman (1996). Bagging predictors. Machine Learning 24, 123-140.

    Examples
    --------
    >>> import numpy as np
    >>> from forestlab.synthetic import friedman3
    >>> X, y = friedman3(200, noise=0.0, rng=2)
    >>> bool((np.abs(y) <= np.pi / 2).all())
    True
    """
    X, reactance, error = _circuit_draws(n, noise, rng)
    return X, np.arctan2(reactance, X[:, 0]) + error
