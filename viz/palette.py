"""The visual language of vesselnet views: colour scales, marks, fonts.

Choices (our own, for legibility on a white page and in print):

- Sequential values run from a deep navy through violet and coral to
  amber.  Lightness rises monotonically along the scale and the hue path
  avoids the red-green axis, so order stays readable with the common
  colour-vision deficiencies and in greyscale.  The scale stops short of
  pale yellow so that thin vessels of the highest values still show on
  white.
- Changes against a baseline use a blue-to-orange diverging scale with a
  light warm grey at zero: unchanged vessels recede, gains (orange) and
  losses (blue) stand out, and blue/orange stays distinct for red-green
  colour-vision deficiencies (common practice, no source).
- Categorical lines (waveforms, baseline against scenario) use the
  Okabe-Ito colours (Okabe and Ito 2008, a palette designed to stay
  distinct under colour-vision deficiencies).
- Marks: beds are dark squares (diamonds in 3-D), flow direction is an
  arrowhead on each vessel, vessels a scenario changed carry a magenta
  halo, added vessels are dashed black, removed vessels dotted grey.

Examples
--------
>>> SEQUENTIAL[0][0], SEQUENTIAL[-1][0]
(0.0, 1.0)
>>> DIVERGING[len(DIVERGING) // 2]
(0.5, '#d6d4cf')
"""

from __future__ import annotations

SEQUENTIAL: tuple[tuple[float, str], ...] = (
    (0.0, "#22306b"), (0.25, "#4a4fa0"), (0.5, "#8e5aa8"), (0.75, "#d46f6a"), (1.0, "#f0b046"))
"""Sequential colour scale (position 0..1, colour)."""

DIVERGING: tuple[tuple[float, str], ...] = (
    (0.0, "#1f5fa8"), (0.25, "#89b4df"), (0.5, "#d6d4cf"), (0.75, "#efa46e"), (1.0, "#b8461a"))
"""Diverging colour scale centred on its middle (zero change)."""

CATEGORICAL: tuple[str, ...] = ("#0072b2", "#e69f00", "#009e73", "#cc79a7", "#56b4e9",
                                "#d55e00", "#f0e442", "#000000")
"""Okabe-Ito colours for categorical series."""

NO_VALUE = "#b9b9b9"
"""Vessels without a value (for example added by a scenario, no baseline to compare)."""

BED = "#2f3640"
ARROW_OUTLINE = "#1d1f24"
CONE = "#5b5f68"
CHANGED_HALO = "rgba(201, 30, 120, 0.38)"
ADDED = "#111111"
REMOVED = "#9a9a9a"
REVERSED = "#111111"
BASELINE_BAR = "#9aa3ad"
SCENARIO_BAR = "#0072b2"
SHARE_BAR = "#4a4fa0"
SERIES_BAR = "#a9add8"
"""Beds that drain into another bed (their flow passes on)."""

PAPER = "#ffffff"
PLOT = "#fbfaf7"
GRID = "#e7e5df"
TEXT = "#23262b"
FONT = "system-ui, -apple-system, 'Segoe UI', 'DejaVu Sans', Helvetica, Arial, sans-serif"


def base_layout() -> dict:
    """Layout settings every vesselnet figure starts from."""
    return {
        "paper_bgcolor": PAPER, "plot_bgcolor": PLOT,
        "font": {"family": FONT, "size": 13, "color": TEXT},
        "margin": {"l": 60, "r": 30, "t": 56, "b": 50},
        "hoverlabel": {"font": {"family": FONT, "size": 12}, "bgcolor": "#ffffff",
                       "bordercolor": "#555555", "align": "left"},
        "legend": {"bgcolor": "rgba(255,255,255,0.8)", "borderwidth": 0},
    }


def axis_style() -> dict:
    """Axis settings of 2-D data axes."""
    return {"gridcolor": GRID, "zerolinecolor": GRID, "linecolor": "#c9c6bf", "ticks": "outside",
            "tickcolor": "#c9c6bf", "automargin": True}
