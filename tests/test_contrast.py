"""Status colours and text on the dashboard meet WCAG 2.1 AA contrast: at least 4.5:1 for
text and status marks (3:1 would do for large text and graphics; we hold all to 4.5:1).

Contrast ratio and relative luminance: W3C, Web Content Accessibility Guidelines (WCAG)
2.1, definitions "contrast ratio" and "relative luminance" (sRGB, IEC 61966-2-1), success
criteria 1.4.3 (text) and 1.4.11 (non-text contrast).
"""

from __future__ import annotations

import pytest

from dashboards import charts, ui

AA_TEXT = 4.5
AA_LARGE = 3.0


def _channel(c8: int) -> float:
    c = c8 / 255.0
    return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4


def luminance(hex_colour: str) -> float:
    """WCAG 2.1 relative luminance of an sRGB colour ``#RRGGBB``."""
    h = hex_colour.lstrip("#")
    r, g, b = (_channel(int(h[i : i + 2], 16)) for i in (0, 2, 4))
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def contrast(a: str, b: str) -> float:
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05), lighter over darker."""
    hi, lo = sorted((luminance(a), luminance(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def test_contrast_formula_against_known_values():
    # black on white is 21:1 by the definition; #777777 on white is 4.48:1 and #767676
    # 4.54:1, the lightest grey passing AA (WebAIM contrast checker, from memory)
    assert contrast("#000000", "#FFFFFF") == pytest.approx(21.0)
    assert contrast("#777777", "#FFFFFF") == pytest.approx(4.48, abs=0.01)
    assert contrast("#767676", "#FFFFFF") == pytest.approx(4.54, abs=0.01)
    # the two failures the issue measured: the old ochre on white, white on the old blue
    assert contrast("#D98A1C", "#FFFFFF") < AA_LARGE
    assert contrast("#FFFFFF", "#5B8DB8") < AA_TEXT


@pytest.mark.parametrize("band", charts.STATUS_ORDER)
def test_every_status_colour_passes_on_its_backgrounds(band):
    colour = charts.STATUS_COLOURS[band]
    assert contrast(colour, "#FFFFFF") >= AA_TEXT  # status marks on the white page
    assert contrast(colour, ui.CHIP_BACKGROUND) >= AA_TEXT  # the count tiles
    assert contrast("#FFFFFF", colour) >= AA_TEXT  # white count labels inside the bars


def test_text_colours_pass():
    assert contrast(charts.INK, "#FFFFFF") >= AA_TEXT  # axis text and titles
    assert contrast(ui.MUTED_TEXT, ui.CHIP_BACKGROUND) >= AA_TEXT  # band names in tiles
    assert contrast(ui.MUTED_TEXT, "#FFFFFF") >= AA_TEXT
