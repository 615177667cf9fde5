"""The checklist's interface: stable ids, sections in order, judgements attached, JSON form."""

from __future__ import annotations

import json

import pytest

from app.review.checklist import REVIEWER_JUDGEMENTS, STANDINGS, Judgement, build_checklist, item_ids
from app.review.rules import SECTION_MODULES
from tests.review.findings_builder import iv_findings

SECTIONS = ("reproduction", "omitted_causes", "relevance", "exclusion", "overidentification", "inference", "design")


def test_standings_and_judgements_are_our_small_sets():
    assert STANDINGS == ("sound", "concern", "serious", "reviewer_judgement", "not_applicable")
    assert REVIEWER_JUDGEMENTS == ("sound", "concern", "serious")


def test_sections_in_order_with_every_item():
    checklist = build_checklist(iv_findings())
    assert [section for section, _, _ in checklist.sections()] == list(SECTIONS)
    assert [item.id for _, _, items in checklist.sections() for item in items] == item_ids()


def test_item_ids_are_the_stable_interface():
    """Judgements are stored by these ids: renaming one orphans reviewers' notes, so changes must be deliberate."""
    assert item_ids() == [
        "reproduction.estimate", "reproduction.std_error", "reproduction.n_obs", "reproduction.first_stage_f",
        "omitted_causes.naive_vs_instrumented", "omitted_causes.sensitivity", "omitted_causes.proportional_selection",
        "omitted_causes.shared_source",
        "relevance.effective_f", "relevance.first_stage_f", "relevance.joint_strength", "relevance.identification",
        "exclusion.argument", "exclusion.as_if_random", "exclusion.balance", "exclusion.direct_effect",
        "exclusion.monotonicity",
        "overidentification.joint_test", "overidentification.blamed_instrument",
        "inference.weak_iv_robust", "inference.few_clusters", "inference.variance_choice", "inference.cluster_level",
        "design.mediator", "design.mediator_manipulated", "design.panel_effects", "design.effects_sampling",
        "design.selection",
    ]


def test_item_ids_are_unique_and_name_their_section():
    ids = item_ids()
    assert len(ids) == len(set(ids))
    for item in build_checklist(iv_findings()).items:
        assert item.id.startswith(item.section + ".")
        assert item.standing in STANDINGS


def test_every_rule_cites_a_source_and_explains_itself():
    for module in SECTION_MODULES:
        for rule in module.RULES:
            assert rule.source.strip(), rule.id
            assert rule.rule.strip(), rule.id
            assert rule.explanation.count(". ") + rule.explanation.endswith(".") >= 2, rule.id


def test_items_that_are_not_sound_carry_a_question():
    for item in build_checklist(iv_findings(), judgements=None).items:
        if item.standing in ("concern", "serious", "reviewer_judgement"):
            assert item.question
        if item.standing == "sound":
            assert item.question is None


def test_judgements_attach_by_id_and_unknown_ids_are_ignored():
    judgement = Judgement("concern", "The lottery ran in two stores only.")
    checklist = build_checklist(iv_findings(), judgements={"exclusion.as_if_random": judgement, "retired.item": judgement})
    assert checklist.item("exclusion.as_if_random").judgement == judgement
    assert checklist.item("exclusion.as_if_random").effective_standing == "concern"


def test_a_judgement_outside_the_reviewer_set_is_refused():
    with pytest.raises(ValueError, match="must be one of"):
        Judgement("not_applicable", "")


def test_json_form_names_the_fields_of_the_interface():
    document = build_checklist(iv_findings(), judgements={"exclusion.argument": Judgement("sound", "ok")}).to_dict()
    json.dumps(document, allow_nan=False)
    assert set(document) == {"checklist", "verdict"}
    entry = document["checklist"][0]
    assert {"id", "section", "item", "standing", "evidence", "rule", "source", "explanation", "question", "judgement"} <= set(entry)
    assert {"code", "label", "summary", "drivers"} == set(document["verdict"])
    judged = next(e for e in document["checklist"] if e["id"] == "exclusion.argument")
    assert judged["judgement"] == {"standing": "sound", "note": "ok", "author": None, "saved_at": None}
