"""Questions of size: the smallest effect of interest and the equivalence verdicts at it.

A margin is the smallest effect size of interest on an index's own scale, written once in the
team's policy (`[margins]`, by index name or by family) or given on the command line
(`--margin INDEX=VALUE`, which overrides the policy). For every index of the audit that has a
margin and a two-one-sided-tests procedure (`equivalence.py`), the audit reports the two
one-sided tests against the bounds no-effect -/+ margin, the 1 - 2 alpha interval and one of four
verdicts (Lakens 2017; Lakens, Scheel & Isager 2018). The tests run at alpha = 1 - level of the
audit, so their interval is the 1 - 2 alpha one (90% beside the audit's 95% intervals), as
Schuirmann (1987) and Lakens (2017) pair them.

An index with a margin but no procedure gets a record saying so, never a silent gap.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from auditor import equivalence as eq
from auditor import equivalence_omnibus as omnibus
from auditor import equivalence_ranks as rank_tests
from auditor.equivalence import VERDICTS

# design -> index -> the two-one-sided-tests function, called as f(samples, margin, alpha, reference)
# on the design's samples (`reference`: the position of the group whose SD scales Glass's delta)
PROCEDURES = {
    "two_independent": {
        "mean_difference": lambda s, m, a, r: eq.mean_difference_tost(s[0], s[1], m, a),
        "cohen_d": lambda s, m, a, r: eq.cohen_d_tost(s[0], s[1], m, a),
        "hedges_g": lambda s, m, a, r: eq.hedges_g_tost(s[0], s[1], m, a),
        "glass_delta": lambda s, m, a, r: eq.glass_delta_tost(s[0], s[1], m, a, reference=r),
        "d_unpooled": lambda s, m, a, r: eq.d_unpooled_tost(s[0], s[1], m, a),
        "prob_superiority": lambda s, m, a, r: eq.prob_superiority_tost(s[0], s[1], m, a),
        "cliff_delta": lambda s, m, a, r: eq.cliff_delta_tost(s[0], s[1], m, a),
        "rank_biserial": lambda s, m, a, r: eq.rank_biserial_tost(s[0], s[1], m, a),
        "hodges_lehmann": lambda s, m, a, r: rank_tests.hodges_lehmann_tost(s[0], s[1], m, a),
    },
    "paired": {  # the samples are the audit's rounded differences, used as given
        "mean_difference": lambda s, m, a, r: eq.paired_mean_difference_tost(s[0], m, a),
        "d_z": lambda s, m, a, r: eq.d_z_tost(s[0], m, a),
        "hodges_lehmann": lambda s, m, a, r: rank_tests.paired_hodges_lehmann_tost(s[0], m, a),
        "ps_dep": lambda s, m, a, r: rank_tests.ps_dep_tost(s[0], m, a),
    },
    "k_independent": {  # one-sided: the index's smallest value is its no-effect value 0
        "eta_squared": lambda s, m, a, r: omnibus.eta_squared_tost(s, m, a),
        "omega_squared": lambda s, m, a, r: omnibus.omega_squared_tost(s, m, a),
        "epsilon_squared_h": lambda s, m, a, r: omnibus.epsilon_squared_h_tost(s, m, a),
    },
    "k_repeated": {
        "kendall_w": lambda s, m, a, r: omnibus.kendall_w_tost(np.column_stack(s), m, a),
    },
}
NOT_AVAILABLE = ("no test against a non-zero null is built for this index yet; its interval"
                 " can still be read against the margin")


# dominance indices of the form 2P - 1 for a proportion P (A for Cliff's delta and the
# rank-biserial r of two groups; the positive share of the signed-rank sum for the matched-pairs
# rank-biserial r): a distance m from 1/2 on P's scale is a distance 2m from 0 on theirs
TWICE_A = frozenset({"cliff_delta", "rank_biserial", "matched_rank_biserial"})
# r = Z / sqrt(N) has no fixed relation to a proportion: a family margin does not apply to it
# (name it in the policy or on the command line to give it one)
NO_FAMILY_MARGIN = frozenset({"r_from_z"})


def margins_for(effects, families: Mapping[str, str], policy_margins: Mapping[str, float],
                given: Mapping[str, float]) -> dict[str, tuple[float, str]]:
    """index -> (margin, where it came from) for the audit's indices: a command-line margin
    (`given`) first, then the policy's for the index, then the policy's for its family. A
    `dominance` family margin is a distance from 1/2 on the probability scale of A and PS_dep,
    so one number asks the same question of every index in the family: the indices equal to
    2P - 1 (`TWICE_A`) get twice it, on their own scale."""
    out = {}
    for name in effects:
        if name in given:
            out[name] = (float(given[name]), "command line")
        elif name in policy_margins:
            out[name] = (float(policy_margins[name]), "policy")
        elif families.get(name) in policy_margins and name not in NO_FAMILY_MARGIN:
            m = float(policy_margins[families[name]])
            if families[name] == "dominance" and name in TWICE_A:
                out[name] = (2.0 * m, f"policy (family dominance: {m:g} on the probability"
                             f" scale, {2.0 * m:g} on the scale of {name} = 2P - 1)")
            else:
                out[name] = (m, f"policy (family {families[name]})")
    return out


def equivalence_records(design: str, samples, margins: Mapping[str, tuple[float, str]],
                        level: float, justification: str | None,
                        reference: int = 1) -> dict[str, dict]:
    """index -> the JSON record of its equivalence question: the margin used and where it came
    from, the policy's justification, and the two one-sided tests (`equivalence.py`) at
    alpha = 1 - level, or the reason none is available."""
    out = {}
    alpha = 1.0 - level
    for name, (margin, source) in margins.items():
        record = {"margin": margin, "margin_from": source, "justification": justification,
                  "alpha": alpha}
        procedure = PROCEDURES.get(design, {}).get(name)
        if procedure is None:
            record["reason"] = NOT_AVAILABLE
        elif not 0.0 < alpha < 0.5:
            record["reason"] = (f"the audit's level {level:g} leaves no one-sided level below"
                                " one half for the two one-sided tests")
        else:
            with np.errstate(all="ignore"):
                try:
                    found = procedure(samples, margin, alpha, reference)
                except ValueError as err:  # a margin outside the index's range, say
                    record["reason"] = f"margin {margin:g} for {name}: {err}"
                    out[name] = record
                    continue
            record.update(found.to_dict())
            record["verdict_text"] = VERDICTS.get(found.verdict) if found.verdict else None
        out[name] = record
    return out



def parse_margin_options(options) -> dict[str, float]:
    """`--margin INDEX=VALUE` options (repeatable) -> {index: value}; a ValueError naming the
    option when one is malformed or not a positive number."""
    out = {}
    for option in options or ():
        name, sep, text = str(option).partition("=")
        name = name.strip()
        try:
            value = float(text)
        except ValueError:
            value = float("nan")
        if not sep or not name or not (value > 0 and np.isfinite(value)):
            raise ValueError(f"--margin '{option}': give INDEX=VALUE with a positive number,"
                             " e.g. --margin cohen_d=0.3")
        out[name] = value
    return out
