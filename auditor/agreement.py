"""Which interval agrees with which test, and whether a reported pair agrees.

An interval agrees with a test when it excludes the no-effect value exactly when the test rejects
at 1 - level. Some pairs agree by construction: the interval is the set of no-effect values the
test would not reject (it inverts the test), or it is built on the same standard error and
reference distribution as the test. `MATCHED` lists them, per design and test, as the interval
method of each index that agrees with that test; `pipeline.estimate_all` computes those
intervals beside the index's own (`Effect.intervals`), and `decide` quotes the matched one for the
primary index when the policy's `intervals.match_test` is true.

The pairs (the index's interval method, its source):
- two groups, Student t: Cohen's d and Hedges' g by the noncentral t (Steiger & Fouladi 1997;
  Hedges' g's limits are d's times the same J), the mean difference by the pooled-variance t.
- two groups, Welch t: the mean difference by Welch's interval; d with unpooled SDs by the
  noncentral t on Welch's t and df (`parametric.d_unpooled_welch_interval`).
- two groups, Brunner-Munzel: A by its Brunner-Munzel interval (the same placements variance,
  df and t quantile as the test: Brunner & Munzel 2000), Cliff's delta and the rank-biserial r
  by the same interval carried through delta = 2A - 1.
- two groups, Mann-Whitney: A by the proportional-odds score interval (Fay & Malinovsky 2018),
  whose critical value is the exact test's when the test is exact; delta and r through 2A - 1.
- paired, paired t: the mean difference by the paired t interval, d_z by the noncentral t, d_av
  by d_z's noncentral-t limits times SD(d) / s_av (`paired.d_av`).
- paired, Wilcoxon: the matched-pairs rank-biserial r and r = Z/sqrt(N) by the signed-rank score
  interval, calibrated to the exact test when the test is exact.
- paired, sign test: PS_dep by a score interval with the trinomial variance whose critical value
  is the exact sign test's (`signed_rank_interval.sign_test_interval`).
Permutation tests and the k-group omnibus tests have no matched interval here: the decision then
quotes the index's own interval and states whether it agrees with the test.
"""

from __future__ import annotations

import math

MATCHED = {
    "two_groups": {
        "student_t": {"cohen_d": "noncentral_t", "hedges_g": "noncentral_t",
                      "mean_difference": "student_t"},
        "welch_t": {"mean_difference": "welch_t", "d_unpooled": "noncentral_t_welch"},
        "brunner_munzel": {"prob_superiority": "brunner_munzel",
                           "cliff_delta": "brunner_munzel_via_A",
                           "rank_biserial": "brunner_munzel_via_A"},
        "mann_whitney": {"prob_superiority": "proportional_odds_score",
                         "cliff_delta": "proportional_odds_score_via_A",
                         "rank_biserial": "proportional_odds_score_via_A",
                         "r_from_z": "proportional_odds_score_via_A"},
    },
    "paired": {
        "paired_t": {"mean_difference": "paired_t", "d_z": "noncentral_t",
                     "d_av": "noncentral_t_scaled"},
        "wilcoxon": {"matched_rank_biserial": "signed_rank_score",
                     "r_from_z": "signed_rank_score_via_rank_biserial"},
        "sign_test": {"ps_dep": "sign_test_score"},
    },
}


def matched_method(design: str, test: str, index: str) -> str | None:
    """The interval method of `index` that agrees with `test` in `design` (a policy table name),
    or None when there is none."""
    return MATCHED.get(design, {}).get(test, {}).get(index)


def agrees(low: float | None, high: float | None, null: float, p: float | None,
           level: float) -> bool | None:
    """Does the interval [low, high] exclude `null` exactly when p < 1 - level? None when either
    side is undefined."""
    if low is None or high is None or p is None or not math.isfinite(p):
        return None
    excludes = not (low <= null <= high)
    return excludes == (p < 1 - level)
