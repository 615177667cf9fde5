"""Figures: built from the same rows the page prints, drawn as self-contained SVG."""

from __future__ import annotations

from typing import Any

from app.web import figures


def findings(**diagnostics: Any) -> dict[str, Any]:
    rows = [
        {"estimator": "ols", "term": "school", "estimate": 0.12, "ci_low": 0.1, "ci_high": 0.14},
        {"estimator": "2sls", "term": "school", "estimate": 0.09, "ci_low": 0.05, "ci_high": 0.13},
        {"estimator": "2sls", "term": "age", "estimate": 0.01, "ci_low": 0.0, "ci_high": 0.02},
    ]
    return {
        "focal": ["school"],
        "outcome": "wage",
        "estimators": [{"code": "ols", "name": "OLS"}, {"code": "2sls", "name": "2SLS"}],
        "estimates": rows,
        "claim": {"claimed": {"term": None, "estimate": "0.090", "std_error": "0.012"}},
        "diagnostics": diagnostics,
    }


def test_the_estimate_panel_holds_the_manuscript_the_estimators_and_the_robust_sets() -> None:
    data = findings(
        anderson_rubin={"name": "Anderson-Rubin", "standing": "computed", "confidence_set": [[None, -1.0], [0.04, None]]},
        clr={"name": "CLR", "standing": "not_applicable", "confidence_set": None},
    )
    (panel,) = figures.estimate_panels(data)

    assert [row.label for row in panel.rows] == ["Manuscript", "OLS", "2SLS", "Anderson-Rubin"]
    manuscript = panel.rows[0]
    assert manuscript.printed == "0.090"
    low, high = manuscript.pieces[0]
    assert (low, high) == (0.09 - 1.96 * 0.012, 0.09 + 1.96 * 0.012)
    assert panel.rows[3].pieces == ((None, -1.0), (0.04, None))


def test_the_text_alternative_states_every_plotted_number() -> None:
    text = figures.describe_panels(figures.estimate_panels(findings()))
    assert text.startswith("Effect of school on wage.")
    assert "Manuscript: 0.090 as printed" in text
    assert "OLS: 0.1200, interval [0.1000, 0.1400]" in text
    assert "2SLS: 0.09000, interval [0.05000, 0.1300]" in text


def test_an_empty_robust_set_is_said_in_words() -> None:
    data = findings(anderson_rubin={"name": "Anderson-Rubin", "standing": "computed", "confidence_set": []})
    assert "Anderson-Rubin: empty set" in figures.describe_panels(figures.estimate_panels(data))


def test_the_first_stage_panel_needs_computed_first_stages() -> None:
    assert figures.first_stage_panels(findings()) == []
    stage = {
        "standing": "computed",
        "regressor": "school",
        "statistic": 55.4,
        "partial_r2": 0.151,
        "coefficients": [{"term": "distance", "estimate": 0.47, "ci_low": 0.34, "ci_high": 0.6}],
    }
    panels = figures.first_stage_panels(findings(first_stage=[stage]))
    assert [panel.title for panel in panels] == ["Instruments → school (F = 55.40, partial R² = 0.151)"]


def test_the_svg_is_self_contained() -> None:
    svg = figures.figure_svg(findings(), figure="estimates")
    assert svg is not None and svg.lstrip().startswith("<?xml")
    assert "<!DOCTYPE" not in svg and "purl.org" not in svg and "<metadata" not in svg
    assert "school" in svg
    assert figures.figure_svg(None, figure="estimates") is None
    assert figures.figure_svg(findings(), figure="first-stage") is None


def test_rendering_is_reproducible() -> None:
    assert figures.figure_svg(findings(), figure="estimates") == figures.figure_svg(findings(), figure="estimates")


def test_the_cache_renders_once() -> None:
    cache = figures.SvgCache(size=2)
    calls: list[int] = []

    def render() -> str:
        calls.append(1)
        return "<svg/>"

    assert cache.get_or_render((1, "estimates"), render) == "<svg/>"
    assert cache.get_or_render((1, "estimates"), render) == "<svg/>"
    assert len(calls) == 1
