"""The registry of effect sizes: name -> how to estimate it, its family, no-effect value, range,
and what it assumes. The pipeline runs every registered effect the same way.

To add an effect: write its vectorised point estimate (`*_values(a, b)` along the last axis) and
its estimate-with-interval function in `parametric.py` or `ranks.py`, then add one `EffectSpec`
line below. The contract tests in `tests/test_effect_contract.py` pick it up automatically.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from functools import partial

import numpy as np

from auditor import parametric as par
from auditor import ranks
from auditor.parametric import Estimate


@dataclass(frozen=True)
class EffectSpec:
    name: str
    family: str  # "mean", "standardized_mean", "dominance" or "shift"
    null_value: float
    bounds: tuple[float, float] | None
    signed: bool  # True: negates when A and B swap; False: maps to 1 - value (probabilities)
    assumes: str
    estimate: Callable[[np.ndarray, np.ndarray, float], Estimate]
    values: Callable[[np.ndarray, np.ndarray], np.ndarray]


def two_group_effects(reference: int = 1) -> tuple[EffectSpec, ...]:
    """Effects for two independent groups; `reference` is the group whose SD scales Glass's
    delta (1 = B, 0 = A)."""
    glass_est = partial(par.glass_delta, reference=reference)
    glass_val = partial(par.glass_delta_values, reference=reference)
    normal_eq = "normal distributions with equal variances"
    return (
        EffectSpec("mean_difference", "mean", 0.0, None, True,
                   "interval: near-normal means (large n or normal data); unequal variances allowed",
                   par.mean_difference, par.mean_difference_values),
        EffectSpec("cohen_d", "standardized_mean", 0.0, None, True, normal_eq,
                   par.cohen_d, par.cohen_d_values),
        EffectSpec("hedges_g", "standardized_mean", 0.0, None, True,
                   normal_eq + "; corrects d's small-sample bias", par.hedges_g, par.hedges_g_values),
        EffectSpec("glass_delta", "standardized_mean", 0.0, None, True,
                   "normal data; only the reference group's SD scales the difference",
                   glass_est, glass_val),
        EffectSpec("d_unpooled", "standardized_mean", 0.0, None, True,
                   "normal data; unequal variances allowed", par.d_unpooled, par.d_unpooled_values),
        EffectSpec("robust_d", "standardized_mean", 0.0, None, True,
                   "symmetric data with possible heavy tails or outliers (20% trimmed)",
                   par.robust_d, par.robust_d_values),
        EffectSpec("prob_superiority", "dominance", 0.5, (0.0, 1.0), False,
                   "independent observations only (ordinal outcome is enough)",
                   ranks.prob_superiority, ranks.prob_superiority_values),
        EffectSpec("cliff_delta", "dominance", 0.0, (-1.0, 1.0), True,
                   "independent observations only (ordinal outcome is enough)",
                   ranks.cliff_delta, ranks.cliff_delta_values),
        EffectSpec("rank_biserial", "dominance", 0.0, (-1.0, 1.0), True,
                   "independent observations only (ordinal outcome is enough)",
                   ranks.rank_biserial, ranks.rank_biserial_values),
        EffectSpec("r_from_z", "dominance", 0.0, (-1.0, 1.0), True,
                   "independent observations; depends on N as well as on the effect",
                   ranks.r_from_z, ranks.r_from_z_values),
        EffectSpec("hodges_lehmann", "shift", 0.0, None, True,
                   "interval: the two distributions differ only by a shift",
                   ranks.hodges_lehmann, ranks.hodges_lehmann_values),
    )


EFFECT_NAMES = tuple(spec.name for spec in two_group_effects())
