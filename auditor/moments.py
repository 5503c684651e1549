"""Means and variances computed about the first value, shared by every stage.

Centring on a data value before summing squares keeps precision for data far from zero
(1e9 +- 1e-3) and makes the variance of a constant group exactly zero, even for decimal values
such as 0.1 whose mean is not exactly representable. Mathematically the result is the usual
mean and sample variance (n - 1 denominator).
"""

from __future__ import annotations

import numpy as np


def mean_var(x: np.ndarray, axis: int = -1) -> tuple[np.ndarray, np.ndarray, int]:
    """(mean, sample variance with n - 1, n) along `axis`."""
    n = x.shape[axis]
    origin = np.take(x, [0], axis=axis)
    centred = x - origin
    shift = np.mean(centred, axis=axis)
    var = np.sum((centred - np.expand_dims(shift, axis)) ** 2, axis=axis) / (n - 1)
    return np.squeeze(origin, axis=axis) + shift, var, n


def sample_sd(x: np.ndarray, axis: int = -1) -> np.ndarray:
    """Sample standard deviation (n - 1 denominator), exactly zero for a constant sample."""
    return np.sqrt(mean_var(x, axis)[1])
