"""Input checks of the registry's estimators, in the manner of scipy.stats: whatever a caller
hands `spec.estimate(*samples, level)` (lists, integer arrays, pandas Series), the estimator sees
float arrays of the design's shape and a level strictly between 0 and 1, or the caller gets a
ValueError saying what is wrong. Values that are missing or not finite (NaN, infinity) are not an
error: the estimate is then undefined (None) with the reason, as for any other data condition,
since which rows to leave out is the caller's decision (the audit leaves them out and counts
them before any estimator runs).

Two independent groups and k independent groups take one 1-D array per group; paired designs
and k repeated conditions take one 2-D array of participants' rows (n, k).
"""

from __future__ import annotations

import numbers
from collections.abc import Callable

import numpy as np

from auditor.catalogue import Design
from auditor.parametric import Estimate

ROWS = frozenset({Design.PAIRED, Design.K_REPEATED})  # designs whose one sample is rows (n, k)


def check_level(level) -> float:
    """The level as a float in (0, 1), else a ValueError."""
    if isinstance(level, bool) or not isinstance(level, numbers.Real) or not 0.0 < level < 1.0:
        raise ValueError(f"level = {level!r}: a confidence level lies strictly between 0 and 1"
                         " (0.95 for a 95% interval)")
    return float(level)


def check_samples(samples, design: Design) -> tuple[tuple[np.ndarray, ...], str | None]:
    """The samples as float arrays of the design's shape (a ValueError otherwise), and the reason
    the estimate is undefined when one holds a missing or non-finite value (else None)."""
    rows = design in ROWS
    if rows and len(samples) != 1:
        raise ValueError(f"{design.words}: give one array of participants' rows (n, k), not"
                         f" {len(samples)} arrays")
    arrays = []
    for i, sample in enumerate(samples, start=1):
        what = "the participants' rows" if rows else f"sample {i}"
        try:
            x = np.asarray(sample, dtype=float)
        except (TypeError, ValueError):
            raise ValueError(f"{what}: not numbers") from None
        wanted = 2 if rows else 1
        if x.ndim != wanted:
            shape = "a 2-D array of participants' rows (n, k)" if rows else "a 1-D array"
            verb = "have" if rows else "has"
            raise ValueError(f"{what} {verb} shape {x.shape}: give {shape}")
        arrays.append(x)
    for i, x in enumerate(arrays, start=1):
        bad = x.size - int(np.count_nonzero(np.isfinite(x)))
        if bad:
            what = "the participants' rows" if rows else f"sample {i}"
            return tuple(arrays), (f"{what}: {bad} value(s) missing or not finite (NaN or"
                                   " infinity); leave them out first")
    return tuple(arrays), None


def checked(estimate: Callable[..., Estimate], design: Design) -> Callable[..., Estimate]:
    """The estimate function with its inputs checked (`check_level`, `check_samples`); the
    unchecked function stays reachable as `__wrapped__`, and an estimate with intervals beside
    the index's own keeps its `without_extras`, checked too."""
    def run(*samples_and_level) -> Estimate:
        if not samples_and_level:
            raise ValueError("give the samples and the confidence level")
        *samples, level = samples_and_level
        level = check_level(level)
        arrays, reason = check_samples(samples, design)
        if reason is not None:
            return Estimate(None, None, reason)
        return estimate(*arrays, level)

    run.__doc__ = estimate.__doc__
    run.__wrapped__ = estimate
    own = getattr(estimate, "without_extras", None)
    if own is not None:
        run.without_extras = checked(own, design)
    return run
