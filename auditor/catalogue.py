"""The catalogue of designs and indices: one frozen record per index of each design, with
everything about it that is not arithmetic. The registry (`effects.py`: how to compute it), the
policy (`policy.INDICES`: what it compares), the texts (`rationale.NAMES`, `rationale.meaning`)
and the screen (`SCREEN_COMPANIONS`, `OUTLIER_WATCH`) read it from here, so that an index's
name, label, family and reading are written once.

A design has one name (`Design`, whose values are the names the JSON documents carry) and one
other spelling, the policy file's table (`Design.policy_table`: "two_groups", "k_groups", ...),
kept because policy files written by users name their tables so.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum


class Design(StrEnum):
    """The four designs the audit covers; the value is the JSON document's `design` (a member
    is that text, compares and hashes as it, and prints as it)."""

    TWO_INDEPENDENT = "two_independent"
    PAIRED = "paired"
    K_INDEPENDENT = "k_independent"
    K_REPEATED = "k_repeated"

    @property
    def policy_table(self) -> str:
        """The policy file's table for this design."""
        return _POLICY_TABLES[self]

    @classmethod
    def from_policy_table(cls, table: str) -> "Design":
        for design, name in _POLICY_TABLES.items():
            if name == table:
                return design
        raise ValueError(f"no design has the policy table '{table}'")

    @property
    def words(self) -> str:
        """The design in words, for messages."""
        return _WORDS[self]


_POLICY_TABLES = {Design.TWO_INDEPENDENT: "two_groups", Design.PAIRED: "paired",
                  Design.K_INDEPENDENT: "k_groups", Design.K_REPEATED: "k_repeated"}
_WORDS = {Design.TWO_INDEPENDENT: "two independent groups", Design.PAIRED:
          "two paired conditions", Design.K_INDEPENDENT: "independent groups",
          Design.K_REPEATED: "repeated conditions"}


@dataclass(frozen=True)
class Index:
    """One index of one design.

    name: the key in the JSON and the policy; label: how the texts name it; family: "mean",
    "standardized_mean", "dominance", "shift", "variance_explained" or "agreement"; compares:
    what a policy pairs it with a test by ("means", "trimmed means", "ranks", "signs");
    null_value: its value when there is no effect; bounds: its range (None: unbounded); signed:
    whether it changes sign when the two groups or conditions swap (unsigned probabilities map
    to 1 - value, omnibus indices do not change); assumes: what its interval (or its reading)
    assumes; reading: what a value says, with {a}, {b} (the compared labels), {v} (the value),
    {pct} (it as a percentage) and {outcome}.
    """

    design: Design
    name: str
    label: str
    family: str
    compares: str
    null_value: float
    bounds: tuple[float, float] | None
    signed: bool
    assumes: str
    reading: str


_TWO, _PAIRED, _K, _KR = Design
_NORMAL_EQ = "normal distributions with equal variances"
_INDEPENDENT = "independent observations only (ordinal outcome is enough)"
_DOMINANCE = "the share of pairs in which '{a}' is higher minus the share in which '{b}' is higher is {v}"
_MEAN = "the mean of '{a}' minus the mean of '{b}' is {v} {outcome} units"
_VARIANCE = "the conditions account for {pct} of the variance"
_RANK_VARIANCE = "group membership accounts for {pct} of the rank variance"

CATALOGUE: tuple[Index, ...] = (
    Index(_TWO, "mean_difference", "the mean difference", "mean", "means", 0.0, None, True,
          "interval: near-normal means (large n or normal data); unequal variances allowed",
          _MEAN),
    Index(_TWO, "cohen_d", "Cohen's d", "standardized_mean", "means", 0.0, None, True,
          _NORMAL_EQ, "the means of '{a}' and '{b}' differ by {v} pooled standard deviations"),
    Index(_TWO, "hedges_g", "Hedges' g", "standardized_mean", "means", 0.0, None, True,
          _NORMAL_EQ + "; corrects d's small-sample bias",
          "the means of '{a}' and '{b}' differ by {v} pooled standard deviations"),
    Index(_TWO, "glass_delta", "Glass's delta", "standardized_mean", "means", 0.0, None, True,
          "normal data; only the reference group's SD scales the difference",
          "the means differ by {v} standard deviations of the reference group"),
    Index(_TWO, "d_unpooled", "d with unpooled SDs", "standardized_mean", "means", 0.0, None,
          True, "normal data; unequal variances allowed",
          "the means differ by {v} root-mean-square standard deviations of the two groups"),
    Index(_TWO, "robust_d", "robust d", "standardized_mean", "trimmed means", 0.0, None, True,
          "symmetric data with possible heavy tails or outliers (20% trimmed)",
          "the 20% trimmed means differ by {v} winsorized standard deviations (scaled to equal d"
          " for normal data)"),
    Index(_TWO, "prob_superiority", "the probability of superiority A", "dominance", "ranks",
          0.5, (0.0, 1.0), False, _INDEPENDENT,
          "a randomly chosen participant of '{a}' has a higher {outcome} than one of '{b}' in"
          " {pct} of pairs (ties counted half)"),
    Index(_TWO, "cliff_delta", "Cliff's delta", "dominance", "ranks", 0.0, (-1.0, 1.0), True,
          _INDEPENDENT, _DOMINANCE),
    Index(_TWO, "rank_biserial", "the rank-biserial correlation", "dominance", "ranks", 0.0,
          (-1.0, 1.0), True, _INDEPENDENT, _DOMINANCE),
    Index(_TWO, "r_from_z", "r = Z/sqrt(N)", "dominance", "ranks", 0.0, (-1.0, 1.0), True,
          "independent observations; depends on N as well as on the effect",
          "the rank-sum z statistic divided by the square root of N is {v}"),
    Index(_TWO, "hodges_lehmann", "the Hodges-Lehmann shift", "shift", "ranks", 0.0, None, True,
          "interval: the two distributions differ only by a shift",
          "the median of all differences '{a}' minus '{b}' is {v} {outcome} units"),
    Index(_PAIRED, "mean_difference", "the mean difference", "mean", "means", 0.0, None, True,
          "interval: near-normal differences (or large n)", _MEAN),
    Index(_PAIRED, "d_z", "d_z", "standardized_mean", "means", 0.0, None, True,
          "normally distributed differences; scaled by SD of differences",
          "the mean difference is {v} standard deviations of the differences"),
    Index(_PAIRED, "d_av", "d_av", "standardized_mean", "means", 0.0, None, True,
          "near-normal conditions; scaled by the average of the two SDs",
          "the mean difference is {v} times the average of the two conditions' SDs"),
    Index(_PAIRED, "d_rm", "d_rm", "standardized_mean", "means", 0.0, None, True,
          "near-normal conditions; d_z rescaled by the A-B correlation",
          "the mean difference is {v} SDs, adjusted for the correlation of the conditions"),
    Index(_PAIRED, "ps_dep", "PS_dep", "dominance", "signs", 0.5, (0.0, 1.0), False,
          "pairs independent of each other; signs only",
          "'{a}' is higher than '{b}' for {pct} of participants (no change counted half)"),
    Index(_PAIRED, "matched_rank_biserial", "the matched-pairs rank-biserial correlation",
          "dominance", "ranks", 0.0, (-1.0, 1.0), True,
          "pairs independent; differences comparable in size (signed ranks)",
          "the signed ranks of the differences favour '{a}' over '{b}' by {v} (share of the"
          " rank sum from increases minus share from decreases)"),
    Index(_PAIRED, "r_from_z", "r = Z/sqrt(N)", "dominance", "ranks", 0.0, (-1.0, 1.0), True,
          "signed-rank z; depends on N as well as on the effect",
          "the signed-rank z statistic divided by the square root of N is {v}"),
    Index(_PAIRED, "hodges_lehmann", "the Hodges-Lehmann shift", "shift", "ranks", 0.0, None,
          True, "interval: differences symmetric about their centre",
          "the median of the differences' pairwise averages ('{a}' minus '{b}') is {v}"
          " {outcome} units"),
    Index(_K, "epsilon_squared_h", "epsilon-squared (from H)", "variance_explained", "ranks",
          0.0, (0.0, 1.0), False, "independent observations (ranks only)", _RANK_VARIANCE),
    Index(_K, "eta_squared_h", "eta-squared (from H)", "variance_explained", "ranks", 0.0, None,
          False, "independent observations (ranks only); can fall below zero", _RANK_VARIANCE),
    Index(_K, "eta_squared", "eta-squared", "variance_explained", "means", 0.0, (0.0, 1.0), False,
          "normal groups with equal variances; biased upward in small samples", _VARIANCE),
    Index(_K, "omega_squared", "omega-squared", "variance_explained", "means", 0.0, None, False,
          "normal groups with equal variances; can fall below zero", _VARIANCE),
    Index(_KR, "kendall_w", "Kendall's W", "agreement", "ranks", 0.0, (0.0, 1.0), False,
          "participants independent of each other (ranks within participant)",
          "the participants' orderings of the conditions agree to W = {v} (0 none, 1 all alike)"),
    Index(_KR, "generalized_eta_squared", "generalized eta-squared", "variance_explained", "means",
          0.0, (0.0, 1.0), False, "normal data; sphericity for the F test beside it", _VARIANCE),
)

# design -> (mean-based, rank-based) index a screen row shows beside the primary
SCREEN_COMPANIONS = {_TWO: ("cohen_d", "prob_superiority"), _PAIRED: ("d_z", "ps_dep"),
                     _K: ("eta_squared", "epsilon_squared_h"),
                     _KR: ("generalized_eta_squared", "kendall_w")}
# design -> the mean-based index the policy's outlier check watches
OUTLIER_WATCH = {_TWO: "cohen_d", _PAIRED: "d_z", _K: "eta_squared",
                 _KR: "generalized_eta_squared"}


# indices whose no-effect value is 1/2 (probabilities), of any design
AT_ONE_HALF = frozenset(i.name for i in CATALOGUE if i.null_value == 0.5)


def indices(design: Design | str) -> tuple[Index, ...]:
    """The design's indices in the registry's order (`design` as a `Design`, its JSON name or
    its policy table)."""
    design = as_design(design)
    return tuple(i for i in CATALOGUE if i.design is design)


def index(design: Design | str, name: str) -> Index:
    """One index of a design; KeyError when the design has no index of that name."""
    for i in indices(design):
        if i.name == name:
            return i
    raise KeyError(name)


def as_design(design: Design | str) -> Design:
    """A `Design` from itself, its JSON name or its policy table."""
    if isinstance(design, Design):
        return design
    try:
        return Design(design)
    except ValueError:
        return Design.from_policy_table(design)


def labels() -> dict[str, str]:
    """index name -> its label, over every design (an index of several designs has one label)."""
    return {i.name: i.label for i in CATALOGUE}


def compares() -> dict[str, dict[str, str]]:
    """policy table -> index -> what it compares (the policy's view of the catalogue)."""
    return {d.policy_table: {i.name: i.compares for i in indices(d)} for d in Design}
