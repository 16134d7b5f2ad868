"""The one place where the look of every chart is set.

The palette is our own. It stays readable under the common colour-vision deficiencies:
the sequential scale runs monotonically in lightness, the diverging scale is blue to
brick through a pale middle, and marks that must stand out (weak-region outlines, the
overall line) differ in lightness, width and dash, not in hue alone.
"""

from __future__ import annotations

import altair as alt

__all__ = ["COLOURS", "DIVERGING", "SEQUENTIAL", "THEME_NAME", "use_theme"]

THEME_NAME = "topoaudit"

#: light sand to deep ink blue, monotone in lightness
SEQUENTIAL = ["#f4ecd8", "#d5dcb4", "#9fc6a5", "#62a59e", "#3b7f94", "#29577d", "#1f3357"]
#: below expected (blue) through as expected (pale) to above expected (brick)
DIVERGING = ["#2c5f8a", "#8fb3cf", "#f2eee6", "#e0a174", "#a8442a"]

COLOURS = {
    "ink": "#1f2a37",
    "muted": "#6b7280",
    "grid": "#e5e1d8",
    "edge": "#b9b3a6",
    "accent": "#a8442a",
    "weak": "#b0126b",
    "good": "#2c5f8a",
    "overall": "#1f2a37",
    "suppressed": "#b3aea4",
}

FONT = "DejaVu Sans"


@alt.theme.register(THEME_NAME, enable=False)
def _theme() -> alt.theme.ThemeConfig:
    return {
        "config": {
            "background": "#ffffff",
            "font": FONT,
            "view": {"stroke": None},
            "title": {"font": FONT, "fontSize": 14, "anchor": "start", "color": COLOURS["ink"]},
            "axis": {
                "labelFont": FONT,
                "titleFont": FONT,
                "labelColor": COLOURS["ink"],
                "titleColor": COLOURS["ink"],
                "gridColor": COLOURS["grid"],
                "domainColor": COLOURS["muted"],
                "tickColor": COLOURS["muted"],
            },
            "legend": {"labelFont": FONT, "titleFont": FONT},
            "range": {"ramp": SEQUENTIAL, "diverging": DIVERGING},
        }
    }


def use_theme() -> None:
    """Enable the theme (idempotent)."""
    alt.theme.enable(THEME_NAME)
