"""The result objects mirror the published schema (auditor/schemas/audit.schema.json): each
frozen result class has exactly the fields of its schema object, a field may be None exactly
where the schema allows null, and each of them is described there. So a program reading the JSON
and one holding the Python objects read the same names with the same meaning."""

from __future__ import annotations

import dataclasses
import typing

import pytest

from auditor import clusters, conversions, coverage_check, decide, influence, results
from auditor.schema import load_schema

MIRRORS = {  # schema $defs name -> the class whose objects it describes
    "interval": results.Interval,
    "effect": results.Effect,
    "group_summary": results.GroupSummary,
    "exclusion": results.Exclusion,
    "data_account": results.DataAccount,
    "normality": results.Normality,
    "ties": results.Ties,
    "outliers": results.Outliers,
    "spread_two": results.Spread,
    "spread_k": results.KSpread,
    "normal_theory": results.NormalTheoryCheck,
    "diagnostics_paired": results.PairedDiagnostics,
    "diagnostics_k": results.KDiagnostics,
    "pair_comparison": results.PairComparison,
    "settings": results.Settings,
    "fragility": influence.Fragility,
    "effect_influence": influence.EffectInfluence,
    "evidence": decide.Evidence,
    "reason": decide.Reason,
    "decision": decide.Decision,
    "coverage_check": coverage_check.CoverageCheck,
    "scale_link": conversions.ScaleLink,
    "conversions": conversions.Conversions,
    "cluster_group": clusters.ClusterGroup,
    "intraclass_correlation": clusters.IntraclassCorrelation,
    "clusters": clusters.Clusters,
}
# Where the JSON differs from the object by design: key -> (fields the JSON adds, fields it drops)
DIFFERENCES = {
    # two-group diagnostics hold the per-group ties inside `ties` in the JSON
    "diagnostics_two": (results.Diagnostics, {"ties"}, {"ties_by_group"}),
    # a cluster interval is keyed by its index's name in the JSON
    "cluster_interval": (clusters.ClusterInterval, set(), {"index"}),
}


def _defs():
    return load_schema("audit")["$defs"]


def _allows_null(node, defs) -> bool:
    if "$ref" in node:
        return _allows_null(defs[node["$ref"].rsplit("/", 1)[1]], defs)
    kinds = node.get("type")
    if kinds == "null" or (isinstance(kinds, list) and "null" in kinds):
        return True
    return any(_allows_null(n, defs) for n in [*node.get("anyOf", ()), *node.get("oneOf", ())])


def _hint(cls, name):
    return typing.get_type_hints(cls)[name]


def _optional(cls, name) -> bool:
    hint = _hint(cls, name)
    return type(None) in typing.get_args(hint) or hint is typing.Any


CASES = [(k, cls, set(), set()) for k, cls in MIRRORS.items()] + [
    (k, cls, add, drop) for k, (cls, add, drop) in DIFFERENCES.items()]


@pytest.mark.parametrize("key, cls, added, dropped", CASES, ids=[c[0] for c in CASES])
def test_each_result_class_has_the_fields_of_its_schema_object(key, cls, added, dropped):
    properties = set(_defs()[key]["properties"])
    fields = {f.name for f in dataclasses.fields(cls)}
    assert (fields - dropped) | added == properties


@pytest.mark.parametrize("key, cls, added, dropped", CASES, ids=[c[0] for c in CASES])
def test_a_field_may_be_none_exactly_where_the_schema_allows_null(key, cls, added, dropped):
    """An optional field is nullable in the schema; a nullable schema field is optional in the
    object, or a float (a non-finite float is written as null: JSON has no NaN)."""
    defs = _defs()
    properties = defs[key]["properties"]
    shared = [n for n in properties if n not in added and n not in dropped]
    never_null = [n for n in shared if _optional(cls, n) and not _allows_null(properties[n], defs)]
    unexplained = [n for n in shared if _allows_null(properties[n], defs)
                   and not _optional(cls, n) and _hint(cls, n) is not float]
    assert not never_null and not unexplained, (never_null, unexplained)


@pytest.mark.parametrize("key", sorted(MIRRORS))
def test_every_mirrored_field_is_described(key):
    properties = _defs()[key]["properties"]
    assert all(p.get("description") or "$ref" in p for p in properties.values())


def test_the_audit_document_is_the_result_object_field_for_field():
    """AuditResult: every schema property is a field, except `direction` (a property of the
    object); the object's `samples` are the analysed values kept for figures, not JSON."""
    schema = load_schema("audit")
    fields = {f.name for f in dataclasses.fields(results.AuditResult)}
    assert set(schema["properties"]) == (fields - {"samples"}) | {"direction"}
    assert isinstance(results.AuditResult.direction, property)


def test_the_audit_results_optional_parts_are_typed_and_nullable_in_the_schema():
    names = {"Influence": influence.Influence, "Decision": decide.Decision,
             "CoverageCheck": coverage_check.CoverageCheck,
             "Conversions": conversions.Conversions, "Clusters": clusters.Clusters}
    hints = typing.get_type_hints(results.AuditResult, localns=names)
    defs, properties = _defs(), load_schema("audit")["properties"]
    for name, cls in names.items():
        key = {"Influence": "influence", "Decision": "decision", "CoverageCheck": "coverage_check",
               "Conversions": "conversions", "Clusters": "clusters"}[name]
        assert set(typing.get_args(hints[key])) == {cls, type(None)}
        assert _allows_null(properties[key], defs)


def _walk(value, path="result"):
    """Every leaf of a result tree with its path (compared fields only)."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        for f in dataclasses.fields(value):
            if f.compare:
                yield from _walk(getattr(value, f.name), f"{path}.{f.name}")
    elif isinstance(value, dict):
        for k, v in value.items():
            yield from _walk(v, f"{path}[{k!r}]")
    elif isinstance(value, (list, tuple)):
        for i, v in enumerate(value):
            yield from _walk(v, f"{path}[{i}]")
    else:
        yield path, value


def _four_designs():
    """Invented data of each design (recovery days under two regimes, three sites, three
    visits): the result objects' bookkeeping is checked here, not a statistic."""
    import numpy as np
    import pandas as pd

    rng = np.random.default_rng(18)
    two = pd.DataFrame({"regime": ["brisk"] * 14 + ["gentle"] * 12,
                        "days": np.round(rng.gamma(4.0, 2.0, 26), 1)})
    sites = pd.DataFrame({"site": np.repeat(["north", "river", "hill"], 10),
                          "days": np.round(rng.normal(12, 3, 30), 1)})
    visits = pd.DataFrame({"id": np.repeat(np.arange(12), 3),
                           "visit": np.tile(["first", "second", "third"], 12),
                           "days": np.round(rng.normal(10, 2, 36), 1)})
    return {"two_independent": dict(data=two, outcome="days", group="regime"),
            "k_independent": dict(data=sites, outcome="days", group="site"),
            "paired": dict(data=visits[visits.visit != "third"], outcome="days", group="visit",
                           subject="id"),
            "k_repeated": dict(data=visits, outcome="days", group="visit", subject="id")}


@pytest.mark.parametrize("design", ["two_independent", "k_independent", "paired", "k_repeated"])
def test_results_compare_equal_by_value_and_hold_python_floats(design):
    import warnings

    import numpy as np

    from auditor.pipeline import audit

    options = _four_designs()[design]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        first = audit(resamples=200, **options)
        again = audit(resamples=200, **options)
        other = audit(resamples=200, seed=7, **options)
    assert first.design == design
    assert first == again
    assert first != other  # another seed: other bootstrap intervals
    numpy_scalars = [p for p, v in _walk(first) if isinstance(v, np.generic)]
    assert not numpy_scalars, numpy_scalars[:5]
