"""The registry of effect sizes: name -> how to estimate it, its family, no-effect value, range,
and what it assumes. The pipeline runs every registered effect the same way: `estimate(*samples,
level)` on the design's samples, `values(*stacked)` on stacked bootstrap or leave-one-out samples.
Samples are (A, B) for two groups, (rows,) with rows of shape (n, 2) or (n, k) for paired and
repeated designs, and the k groups for k independent groups.

To add an effect: write its vectorised point estimate (`*_values(a, b)` along the last axis) and
its estimate-with-interval function in `parametric.py` or `ranks.py`, then add one `EffectSpec`
line below. The contract tests in `tests/test_effect_contract.py` pick it up automatically.
"""

from __future__ import annotations

from collections.abc import Callable
import dataclasses
from dataclasses import dataclass
from functools import partial

import numpy as np

from auditor import jackknife as jk
from auditor import jackknife_omnibus as jo
from auditor import jackknife_signed_ranks as jsr
from auditor import shifts
from auditor import catalogue, counting, kgroups, noncentral, paired, ranks
from auditor.catalogue import Design
from auditor.inputs import checked
from auditor import parametric as par
from auditor.parametric import Estimate
from auditor.signed_rank_interval import paired_extras
from auditor.superiority_interval import dominance_extras, dominance_holds_null


@dataclass(frozen=True)
class EffectSpec:
    name: str
    family: str  # "mean", "standardized_mean", "dominance" or "shift"
    null_value: float
    bounds: tuple[float, float] | None
    signed: bool  # True: negates when A and B swap; False: does not (probabilities map to 1 - value)
    assumes: str
    estimate: Callable[..., Estimate]
    values: Callable[..., np.ndarray]
    leave_one_out: Callable[..., tuple[np.ndarray, ...]] | None = None  # exact fast path
    by_counts: Callable[..., Callable[..., np.ndarray]] | None = None  # samples -> count statistic
    # (other effect, map): bootstrap and leave-one-out values are map(other's), e.g. delta = 2A - 1
    derived_from: tuple[str, Callable[[np.ndarray], np.ndarray]] | None = None
    # samples -> why every resample inherits a degenerate state (complete separation, differences
    # of one sign), or None: the bootstrap interval is then withheld (`resampling.bca_interval`)
    degenerate: Callable[..., str | None] | None = None
    # (*samples, level, method) -> whether the interval of that method on these samples contains
    # the no-effect value, found without computing the interval, or None (not known that way):
    # the influence checks ask only this, once per case and per step of the fragility search
    holds_null: Callable[..., bool | None] | None = None


def with_extras(estimate: Callable[..., Estimate], extras: Callable[..., tuple]):
    """The estimate function with more intervals beside the index's own (`Estimate.more`):
    `extras(*samples, level)` gives them (test-matched and boundary-valid intervals)."""
    def combined(*samples_and_level) -> Estimate:
        est = estimate(*samples_and_level)
        if est.value is None:
            return est
        return dataclasses.replace(est, more=est.more + tuple(extras(*samples_and_level)))
    combined.__doc__ = estimate.__doc__
    combined.without_extras = estimate  # the index's own estimate, for callers that need only it
    return combined


def _two_a_minus_one(a: np.ndarray) -> np.ndarray:
    return 2.0 * a - 1.0


def _spec(design: Design, name: str, estimate, values, *function, **functions) -> EffectSpec:
    """The registry's entry for `name`: its functions, with its family, no-effect value, range,
    sign and assumptions from the catalogue (`catalogue.py`); its estimate checks its inputs
    (`inputs.checked`: float arrays of the design's shape, a level in (0, 1), None with the
    reason for missing or non-finite values)."""
    record = catalogue.index(design, name)
    return EffectSpec(name, record.family, record.null_value, record.bounds, record.signed,
                      record.assumes, checked(estimate, design), values, *function, **functions)


def two_group_effects(reference: int = 1) -> tuple[EffectSpec, ...]:
    """Effects for two independent groups; `reference` is the group whose SD scales Glass's
    delta (1 = B, 0 = A)."""
    glass_est = partial(par.glass_delta, reference=reference)
    glass_val = partial(par.glass_delta_values, reference=reference)
    glass_counts = partial(counting.glass_delta_counts, reference=reference)
    spec = partial(_spec, Design.TWO_INDEPENDENT)
    return (
        spec("mean_difference", par.mean_difference, par.mean_difference_values,
             jk.mean_difference, counting.mean_difference_counts),
        spec("cohen_d", par.cohen_d, par.cohen_d_values, jk.cohen_d, counting.cohen_d_counts,
             holds_null=par.noncentral_t_holds_zero),
        spec("hedges_g", par.hedges_g, par.hedges_g_values, jk.hedges_g,
             counting.hedges_g_counts, holds_null=par.noncentral_t_holds_zero),
        spec("glass_delta", glass_est, glass_val, partial(jk.glass_delta, reference=reference),
             glass_counts),
        spec("d_unpooled", par.d_unpooled, par.d_unpooled_values, jk.d_unpooled,
             counting.d_unpooled_counts),
        spec("robust_d", par.robust_d, par.robust_d_values, jk.robust_d,
             counting.robust_d_counts),
        spec("prob_superiority",
             with_extras(ranks.prob_superiority, dominance_extras("prob_superiority")),
             ranks.prob_superiority_values, jk.prob_superiority, ranks.prob_superiority_counts,
             degenerate=ranks.separation, holds_null=dominance_holds_null("prob_superiority")),
        spec("cliff_delta", with_extras(ranks.cliff_delta, dominance_extras("cliff_delta")),
             ranks.cliff_delta_values, jk.cliff_delta, ranks.cliff_delta_counts,
             ("prob_superiority", _two_a_minus_one), ranks.separation,
             dominance_holds_null("cliff_delta")),
        spec("rank_biserial", with_extras(ranks.rank_biserial, dominance_extras("rank_biserial")),
             ranks.rank_biserial_values, jk.rank_biserial, ranks.cliff_delta_counts,
             ("prob_superiority", _two_a_minus_one), ranks.separation,
             dominance_holds_null("rank_biserial")),
        spec("r_from_z", with_extras(ranks.r_from_z, dominance_extras("r_from_z")),
             ranks.r_from_z_values, jk.r_from_z, ranks.r_from_z_counts,
             degenerate=ranks.separation, holds_null=dominance_holds_null("r_from_z")),
        spec("hodges_lehmann", ranks.hodges_lehmann, ranks.hodges_lehmann_values,
             shifts.hodges_lehmann_without_each, shifts.hodges_lehmann_by_counts),
    )


def _pair_estimate(fn, digits):
    def estimate(x, level):
        return fn(x[:, 0], x[:, 1], level, digits)
    return estimate


def paired_effects(digits: int = 12) -> tuple[EffectSpec, ...]:
    """Effects for two conditions on the same participants; differences are rounded to `digits`
    decimal places before signs and ranks are taken (see `paired.differences`)."""
    def spec(name, est, values, fast=None, signs=False):
        estimate = _pair_estimate(est, digits)
        if name in ("ps_dep", "matched_rank_biserial", "r_from_z"):
            estimate = with_extras(estimate, paired_extras(name, digits))
        return _spec(Design.PAIRED, name, estimate, partial(values, digits=digits),
                     None if fast is None else partial(fast, digits=digits),
                     degenerate=partial(paired.one_signed, digits=digits) if signs else None)
    return (
        spec("mean_difference", paired.mean_difference, paired.mean_difference_values,
             jk.paired_mean_difference),
        spec("d_z", paired.d_z, paired.d_z_values, jk.paired_d_z),
        spec("d_av", paired.d_av, paired.d_av_values, jk.paired_d_av),
        spec("d_rm", paired.d_rm, paired.d_rm_values, jk.paired_d_rm),
        spec("ps_dep", paired.ps_dep, paired.ps_dep_values, jk.paired_ps_dep),
        spec("matched_rank_biserial", paired.matched_rank_biserial,
             paired.matched_rank_biserial_values, jsr.matched_rank_biserial, signs=True),
        spec("r_from_z", paired.r_from_z, paired.r_from_z_values, jsr.r_from_z, signs=True),
        spec("hodges_lehmann", paired.hodges_lehmann, paired.hodges_lehmann_values,
             shifts.paired_hodges_lehmann_without_each),
    )


def _omnibus(fn):
    def estimate(*samples_and_level):
        return fn(*samples_and_level[:-1])
    return estimate


def _rows_omnibus(fn):
    def estimate(x, level):
        return fn(x)
    return estimate


def _noncentral(point: Callable[..., Estimate], interval: Callable[..., Estimate], own: bool,
                rows: bool = False):
    """An omnibus estimate (`point`, from kgroups) with its noncentral-F or noncentral
    chi-squared interval (`interval`, from noncentral.py): as the index's own interval when
    `own`, else beside it (`Estimate.more`: the bootstrap stays the index's interval and this one
    stands in where the bootstrap is withheld). An inversion that gives the single point 0 (the
    statistic below its no-effect quantile) is no interval: it is dropped with its note."""
    def estimate(*samples_and_level) -> Estimate:
        samples, level = samples_and_level[:-1], samples_and_level[-1]
        est = point(*samples)
        if est.value is None:
            return est
        found = interval(samples[0] if rows else samples, level)
        iv, notes = found.interval, tuple(found.notes)
        if iv is not None and iv.high <= 0.0:
            notes += (f"no {iv.method} interval: {iv.note}",)
            iv = None
        elif iv is None and found.reason:
            notes += (f"no {interval.__name__.split('_interval')[0]} noncentral interval:"
                      f" {found.reason}",)
        details = {**est.details, **{k: v for k, v in found.details.items() if k != "df"}}
        if own:
            return dataclasses.replace(est, interval=iv, notes=est.notes + notes, details=details)
        return dataclasses.replace(est, more=est.more + (() if iv is None else (iv,)),
                                   notes=est.notes + notes)
    estimate.__doc__ = point.__doc__
    return estimate


def k_independent_effects() -> tuple[EffectSpec, ...]:
    """Omnibus effects for three or more independent groups."""
    spec = partial(_spec, Design.K_INDEPENDENT)
    return (
        spec("epsilon_squared_h",
             _noncentral(kgroups.epsilon_squared_h, noncentral.epsilon_squared_h_interval,
                         own=False), kgroups.epsilon_squared_h_values, jo.epsilon_squared_h),
        spec("eta_squared_h", _omnibus(kgroups.eta_squared_h), kgroups.eta_squared_h_values,
             jo.eta_squared_h),
        spec("eta_squared",
             _noncentral(kgroups.eta_squared, noncentral.eta_squared_interval, own=True),
             kgroups.eta_squared_values, jo.eta_squared),
        spec("omega_squared",
             _noncentral(kgroups.omega_squared, noncentral.omega_squared_interval, own=True),
             kgroups.omega_squared_values, jo.omega_squared),
    )


def k_repeated_effects() -> tuple[EffectSpec, ...]:
    """Omnibus effects for three or more conditions on the same participants."""
    spec = partial(_spec, Design.K_REPEATED)
    return (
        spec("kendall_w",
             _noncentral(kgroups.kendall_w, noncentral.kendall_w_interval, own=False, rows=True),
             kgroups.kendall_w_values, jo.kendall_w),
        spec("generalized_eta_squared", _rows_omnibus(kgroups.generalized_eta_squared),
             kgroups.generalized_eta_squared_values, jo.generalized_eta_squared),
    )


EFFECT_NAMES = tuple(spec.name for spec in two_group_effects())
