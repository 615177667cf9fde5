"""The keyboard focus ring stands out on every background the stylesheet paints.

Contrast ratios follow WCAG 2.x: relative luminance of sRGB colours
(https://www.w3.org/TR/WCAG21/#dfn-relative-luminance) and the ratio
(L1 + 0.05) / (L2 + 0.05) (https://www.w3.org/TR/WCAG21/#dfn-contrast-ratio).
Non-text contrast (success criterion 1.4.11) asks for at least 3:1.
"""

from __future__ import annotations

import re
from pathlib import Path

import pytest

STYLESHEET = Path(__file__).resolve().parents[2] / "static" / "css" / "secondstage.css"
NON_TEXT_MINIMUM = 3.0
HEX = r"#[0-9a-fA-F]{3}(?:[0-9a-fA-F]{3})?"


def relative_luminance(colour: str) -> float:
    """WCAG 2.x relative luminance of a ``#rgb`` or ``#rrggbb`` colour."""
    digits = colour.lstrip("#")
    if len(digits) == 3:
        digits = "".join(2 * d for d in digits)
    channels = [int(digits[i : i + 2], 16) / 255 for i in (0, 2, 4)]
    linear = [c / 12.92 if c <= 0.03928 else ((c + 0.055) / 1.055) ** 2.4 for c in channels]
    return 0.2126 * linear[0] + 0.7152 * linear[1] + 0.0722 * linear[2]


def contrast(first: str, second: str) -> float:
    """WCAG 2.x contrast ratio, from 1 (same colour) to 21 (black on white)."""
    lighter, darker = sorted((relative_luminance(first), relative_luminance(second)), reverse=True)
    return (lighter + 0.05) / (darker + 0.05)


def custom_properties(css: str) -> dict[str, str]:
    """The hex colours declared as custom properties (``--name: #hex;``)."""
    return dict(re.findall(rf"(--[\w-]+):\s*({HEX})\s*;", css))


def backgrounds(css: str) -> set[str]:
    """Every solid background colour the stylesheet paints, custom properties resolved."""
    properties = custom_properties(css)
    found = set()
    for value in re.findall(r"background(?:-color)?:\s*([^;}]+)", css):
        value = value.strip()
        if re.fullmatch(HEX, value):
            found.add(value.lower())
        elif match := re.fullmatch(r"var\((--[\w-]+)\)", value):
            found.add(properties[match.group(1)].lower())
    return found


CSS = STYLESHEET.read_text(encoding="utf-8")
FOCUS = custom_properties(CSS)


def test_the_contrast_formula_gives_the_published_extremes() -> None:
    assert contrast("#000000", "#ffffff") == pytest.approx(21.0)
    assert contrast("#777", "#777777") == pytest.approx(1.0)
    assert contrast("#767676", "#ffffff") == pytest.approx(4.54, abs=0.01)  # the usual grey that just passes 4.5:1


def test_the_focus_ring_is_drawn_in_two_tones_from_the_custom_properties() -> None:
    rule = re.search(r":focus-visible\s*\{([^}]*)\}", CSS)
    assert rule is not None
    assert "outline: 3px solid var(--focus-ring)" in rule.group(1)
    assert "var(--focus-halo)" in rule.group(1)


def test_the_two_tones_of_the_ring_contrast_with_each_other() -> None:
    assert contrast(FOCUS["--focus-ring"], FOCUS["--focus-halo"]) >= NON_TEXT_MINIMUM


def test_the_stylesheet_paints_the_backgrounds_we_expect() -> None:
    found = backgrounds(CSS)
    for name in ("--paper", "--panel", "--ink", "--accent", "--accent-wash", "--serious-wash", "--reviewer-wash"):
        assert FOCUS[name].lower() in found, name


@pytest.mark.parametrize("background", sorted(backgrounds(CSS)))
def test_one_tone_of_the_ring_stands_out_on_every_background(background: str) -> None:
    best = max(contrast(FOCUS["--focus-ring"], background), contrast(FOCUS["--focus-halo"], background))
    assert best >= NON_TEXT_MINIMUM, f"focus ring on {background}: {best:.2f}:1"


def test_amber_alone_would_not_do_on_the_page_so_the_dark_tone_carries_it() -> None:
    assert contrast(FOCUS["--focus-halo"], FOCUS["--paper"]) < NON_TEXT_MINIMUM
    assert contrast(FOCUS["--focus-ring"], FOCUS["--paper"]) >= NON_TEXT_MINIMUM
