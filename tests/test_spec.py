"""The claim specification: structured roles, refusals that name the field, printed numbers kept as text."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from app.errors import SpecError
from app.spec import ClaimSpec, load_claim, parse_claim

MINIMAL = {"outcome": "wage", "endogenous": ["schooling"], "instruments": ["lottery"]}


def test_minimal_claim_has_documented_defaults() -> None:
    spec = parse_claim(MINIMAL)
    assert spec.design.value == "iv"
    assert spec.intercept is True
    assert spec.covariance.value == "robust"
    assert spec.controls == [] and spec.fixed_effects == [] and spec.cluster == []


def test_unknown_field_is_refused_with_its_name_and_a_suggestion() -> None:
    with pytest.raises(SpecError, match="unknown field 'instrumnets' \\(did you mean 'instruments'\\?\\)"):
        parse_claim({**MINIMAL, "instrumnets": ["z"]})


def test_unknown_nested_field_is_named_with_its_path() -> None:
    with pytest.raises(SpecError, match="unknown field 'claimed.std_err' \\(did you mean 'std_error'\\?\\)"):
        parse_claim({**MINIMAL, "claimed": {"std_err": "0.1"}})


def test_missing_outcome_is_named() -> None:
    with pytest.raises(SpecError, match="missing field 'outcome'"):
        parse_claim({"endogenous": ["x"]})


@pytest.mark.parametrize(
    ("fields", "message"),
    [
        ({"covariance": "cluster"}, "needs one or two 'cluster' columns"),
        ({"cluster": ["school"]}, "'cluster' columns are given but covariance is 'robust'"),
        ({"fixed_effects": ["a", "b", "c"]}, "fixed_effects"),
        ({"instruments": ["schooling"]}, "column 'schooling' is both focal regressor and instrument"),
        ({"filters": [{"column": "year", "op": "between", "value": 3}]}, "filters.0.op"),
        ({"filters": [{"column": "year", "op": "in", "value": 3}]}, "the 'in' operator needs a list"),
        ({"design": "mediation"}, "randomized 'treatment'"),
        ({"design": "panel"}, "needs a 'unit' identifier"),
    ],
)
def test_inconsistent_roles_are_refused_in_words(fields: dict, message: str) -> None:
    with pytest.raises(SpecError, match=message):
        parse_claim({**MINIMAL, **fields})


def test_reported_numbers_keep_their_printed_digits() -> None:
    spec = parse_claim({**MINIMAL, "claimed": {"estimate": "0.130", "std_error": 0.05, "n_obs": 420}})
    assert spec.claimed is not None
    assert spec.claimed.estimate == "0.130"
    assert spec.claimed.std_error == "0.05"


def test_a_reported_number_that_is_not_a_number_is_refused() -> None:
    with pytest.raises(SpecError, match="claimed.estimate: 'about 0.1' is not a number as printed"):
        parse_claim({**MINIMAL, "claimed": {"estimate": "about 0.1"}})


def test_used_columns_lists_every_role_once() -> None:
    spec = parse_claim({**MINIMAL, "controls": ["age"], "categorical": ["region"], "weights": "w", "cluster": ["school"], "covariance": "cluster"})
    assert spec.used_columns() == ["wage", "schooling", "lottery", "age", "region", "school", "w"]


def test_mediation_roles_map_to_focal_and_instruments() -> None:
    spec = parse_claim({"design": "mediation", "outcome": "sales", "treatment": ["coached"], "mediator": "confidence"})
    assert spec.focal == ["confidence"]
    assert spec.excluded_instruments == ["coached"]


def test_claims_load_from_toml_and_json(tmp_path: Path) -> None:
    (tmp_path / "claim.json").write_text(json.dumps(MINIMAL))
    (tmp_path / "claim.toml").write_text('outcome = "wage"\nendogenous = ["schooling"]\ninstruments = ["lottery"]\n')
    assert load_claim(tmp_path / "claim.json") == load_claim(tmp_path / "claim.toml") == ClaimSpec(**MINIMAL)


def test_a_spec_file_that_does_not_parse_gives_its_format_and_name(tmp_path: Path) -> None:
    path = tmp_path / "claim.toml"
    path.write_text("outcome = ")
    with pytest.raises(SpecError, match="claim spec claim.toml is not valid TOML"):
        load_claim(path)
    with pytest.raises(SpecError, match="claim spec file not found"):
        load_claim(tmp_path / "absent.json")
