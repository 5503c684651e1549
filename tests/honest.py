"""The check that an audit's intervals are honest at the edges, shared by the tests that run
audits over catalogues (hostile inputs, the demo, the boundary cases)."""

from __future__ import annotations

from auditor.effects import (k_independent_effects, k_repeated_effects, paired_effects,
                             two_group_effects)

BOUNDS = {
    "two_independent": {s.name: s.bounds for s in two_group_effects()},
    "paired": {s.name: s.bounds for s in paired_effects()},
    "k_independent": {s.name: s.bounds for s in k_independent_effects()},
    "k_repeated": {s.name: s.bounds for s in k_repeated_effects()},
}


def assert_honest_intervals(doc: dict) -> None:
    """In an audit's JSON document: no bounded index has a bootstrap interval when its estimate
    sits at a bound (the reason is given instead), no bounded index has an interval that has
    collapsed to a point, and every interval is ordered."""
    bounds = BOUNDS[doc["design"]]
    for name, effect in doc["effects"].items():
        for iv in effect["intervals"]:
            if iv["low"] is not None:
                assert iv["low"] <= iv["high"], (name, iv)
        limits = bounds.get(name)
        if limits is None or effect["estimate"] is None:
            continue
        methods = [iv["method"] for iv in effect["intervals"]]
        if effect["estimate"] in limits:
            assert "bca_bootstrap" not in methods, (name, effect["estimate"])
            assert effect["bootstrap_reason"], name
        for iv in effect["intervals"]:
            if iv["low"] is not None:
                assert iv["high"] > iv["low"], (name, iv)
