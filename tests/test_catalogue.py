"""The catalogue (auditor/catalogue.py) is the one place an index's name, label, family and
reading are written: every registry entry is in it and every catalogue entry is in a registry,
in the same order, and the policy, texts and screen read their tables from it."""

from __future__ import annotations

import pytest

from auditor import catalogue, decide, pipeline, policy, rationale
from auditor.catalogue import Design
from auditor.effects import (k_independent_effects, k_repeated_effects, paired_effects,
                             two_group_effects)

REGISTRIES = {Design.TWO_INDEPENDENT: two_group_effects, Design.PAIRED: paired_effects,
              Design.K_INDEPENDENT: k_independent_effects, Design.K_REPEATED: k_repeated_effects}


@pytest.mark.parametrize("design", list(Design), ids=lambda d: d.value)
def test_the_registry_is_the_catalogue_of_its_design(design):
    specs = REGISTRIES[design]()
    records = catalogue.indices(design)
    assert [s.name for s in specs] == [r.name for r in records]
    for spec, record in zip(specs, records):
        assert (spec.family, spec.null_value, spec.bounds, spec.signed, spec.assumes) == (
            record.family, record.null_value, record.bounds, record.signed, record.assumes)


def test_one_label_per_index_name_across_designs():
    for name, label in catalogue.labels().items():
        assert {r.label for r in catalogue.CATALOGUE if r.name == name} == {label}


@pytest.mark.parametrize("record", catalogue.CATALOGUE, ids=lambda r: f"{r.design.value}-{r.name}")
def test_every_reading_is_written_from_the_value_and_the_labels(record):
    text = rationale.meaning(record.name, 0.25, ("first", "second"), "score", 2,
                             record.design.value)
    assert "{" not in text and "}" not in text
    assert "0.25" in text or "25.0%" in text


def test_the_policy_texts_and_screen_read_their_tables_from_the_catalogue():
    assert policy.INDICES == catalogue.compares()
    assert policy.DESIGNS == {d.policy_table: d.value for d in Design}
    assert rationale.NAMES == catalogue.labels()
    assert decide.MEAN_INDEX == {d.policy_table: n for d, n in catalogue.OUTLIER_WATCH.items()}
    assert pipeline.SCREEN_COMPANIONS == {d.value: p
                                          for d, p in catalogue.SCREEN_COMPANIONS.items()}
    for design in Design:
        names = {r.name for r in catalogue.indices(design)}
        assert set(catalogue.SCREEN_COMPANIONS[design]) <= names
        assert catalogue.OUTLIER_WATCH[design] in names


def test_a_design_is_found_by_its_json_name_or_its_policy_table():
    for design in Design:
        assert catalogue.as_design(design.value) is design
        assert catalogue.as_design(design.policy_table) is design
        assert catalogue.as_design(design) is design
    with pytest.raises(ValueError, match="no design"):
        catalogue.as_design("three_way")
    with pytest.raises(KeyError):
        catalogue.index(Design.PAIRED, "cohen_d")
