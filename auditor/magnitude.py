"""Conventional magnitude labels ('negligible', 'small', 'medium', 'large') for each index.

These are conventions, not findings: weigh them against the effects reported in the field's own
literature. Each set names its source; a set without a single published source is marked
"common practice". Labels use the distance from the no-effect value (|d|, |A - 0.5|, ...).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Benchmarks:
    small: float
    medium: float
    large: float
    null_value: float
    source: str


_D = Benchmarks(0.2, 0.5, 0.8, 0.0, "Cohen 1988, sec. 2.2")
_D_PAIRED = Benchmarks(0.2, 0.5, 0.8, 0.0, "Cohen 1988 thresholds applied to paired d (common practice)")
_A = Benchmarks(0.06, 0.14, 0.21, 0.5, "Vargha & Delaney 2000, p. 106 (A = 0.56, 0.64, 0.71)")
_PS_DEP = Benchmarks(0.06, 0.14, 0.21, 0.5, "Vargha & Delaney thresholds applied to PS_dep (common practice)")
_DELTA = Benchmarks(0.147, 0.33, 0.474, 0.0, "Romano et al. 2006")
_R = Benchmarks(0.1, 0.3, 0.5, 0.0, "Cohen 1988, sec. 3.2")
_R_LIKE = Benchmarks(0.1, 0.3, 0.5, 0.0, "Cohen's r thresholds (common practice)")
_ETA = Benchmarks(0.01, 0.06, 0.14, 0.0, "Cohen 1988, sec. 8.2 (for eta squared)")
_ETA_LIKE = Benchmarks(0.01, 0.06, 0.14, 0.0, "Cohen's eta-squared thresholds (common practice)")

DEFAULT_BENCHMARKS: dict[str, Benchmarks] = {
    "cohen_d": _D, "hedges_g": _D, "glass_delta": _D, "d_unpooled": _D, "robust_d": _D,
    "d_z": _D_PAIRED, "d_av": _D_PAIRED, "d_rm": _D_PAIRED,
    "prob_superiority": _A, "ps_dep": _PS_DEP,
    "cliff_delta": _DELTA, "rank_biserial": _DELTA,
    "r_from_z": _R, "matched_rank_biserial": _R_LIKE, "kendall_w": _R_LIKE,
    "eta_squared": _ETA, "epsilon_squared_h": _ETA_LIKE, "eta_squared_h": _ETA_LIKE,
    "omega_squared": _ETA_LIKE, "generalized_eta_squared": _ETA_LIKE,
}


def magnitude_label(name: str, value: float | None,
                    benchmarks: dict[str, Benchmarks] = DEFAULT_BENCHMARKS) -> str | None:
    """The conventional label of `value` for index `name`, or None when the index is in raw units
    (mean difference, Hodges-Lehmann shift) or undefined."""
    b = benchmarks.get(name)
    if b is None or value is None:
        return None
    size = abs(value - b.null_value)
    if size >= b.large:
        return "large"
    if size >= b.medium:
        return "medium"
    if size >= b.small:
        return "small"
    return "negligible"


LABELS = ("negligible", "small", "medium", "large")


def magnitude_levels(name: str, values, benchmarks: dict[str, Benchmarks] = DEFAULT_BENCHMARKS):
    """Vectorised `magnitude_label`: the index into LABELS of each value (NaN gives -1), or None
    when the index has no benchmarks."""
    b = benchmarks.get(name)
    if b is None:
        return None
    size = np.abs(np.asarray(values, dtype=float) - b.null_value)
    levels = ((size >= b.small).astype(int) + (size >= b.medium) + (size >= b.large))
    return np.where(np.isfinite(size), levels, -1)
