"""Colour and width classes of vessels, so that a view needs few traces.

Drawing every vessel as its own trace does not scale (10^5 traces stall a
browser); one trace per colour class and width class does, with a handful
of classes of each.  Colour classes split the value range evenly (on a
logarithmic axis for quantities spanning several decades; symmetric about
zero for changes), width classes split the logarithm of the radius.

Examples
--------
>>> import numpy as np
>>> scale = colour_scale(np.array([-2.0, 0.5, 1.0]), diverging=True)
>>> scale.lo, scale.hi, scale.classes(np.array([-2.0, 0.0, 2.0])).tolist()
(-2.0, 2.0, [0, 5, 10])
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from plotly.colors import sample_colorscale

from . import palette

SEQUENTIAL_CLASSES = 12
DIVERGING_CLASSES = 11
"""Odd, so that zero falls in the middle (neutral) class."""
LOG_SPAN = 100.0
"""Positive values spanning more than this factor are coloured on a log axis."""


@dataclass(frozen=True)
class ColourScale:
    """A stepped colour scale over a value range.

    ``lo``/``hi`` are in the quantity's unit; with ``log`` the classes split
    ``log10`` of the value evenly.  ``colours[k]`` is the colour of class k.
    """

    lo: float
    hi: float
    log: bool
    diverging: bool
    colours: tuple[str, ...]

    @property
    def count(self) -> int:
        return len(self.colours)

    def position(self, values: np.ndarray) -> np.ndarray:
        """Where values sit on the colour axis (log10 of the value when ``log``)."""
        values = np.asarray(values, dtype=float)
        if self.log:
            with np.errstate(divide="ignore", invalid="ignore"):
                return np.log10(np.where(values > 0, values, self.lo))
        return values

    @property
    def axis(self) -> tuple[float, float]:
        """The colour-axis range (``cmin``, ``cmax``)."""
        if self.log:
            return float(np.log10(self.lo)), float(np.log10(self.hi))
        return self.lo, self.hi

    @property
    def edges(self) -> np.ndarray:
        """Class edges in the quantity's unit, ``count + 1`` of them."""
        a, b = self.axis
        edges = np.linspace(a, b, self.count + 1)
        return 10.0**edges if self.log else edges

    def classes(self, values: np.ndarray) -> np.ndarray:
        """Class of each value, -1 for NaN."""
        a, b = self.axis
        t = self.position(values)
        span = b - a if b > a else 1.0
        k = np.floor((t - a) / span * self.count)
        k = np.clip(np.nan_to_num(k, nan=-1.0), 0, self.count - 1).astype(np.int64)
        return np.where(np.isnan(np.asarray(values, dtype=float)), -1, k)

    def plotly_scale(self) -> list[list]:
        """A stepped plotly colorscale matching the classes exactly."""
        steps = []
        for k, colour in enumerate(self.colours):
            steps += [[k / self.count, colour], [(k + 1) / self.count, colour]]
        return steps

    def ticks(self) -> dict:
        """Colour-bar ticks: decades (1, 2, 5 per decade) in real values for a log scale."""
        if not self.log:
            return {}
        a, b = self.axis
        values = [m * 10.0**e for e in range(int(np.floor(a)), int(np.ceil(b)) + 1) for m in (1, 2, 5)]
        values = [v for v in values if a - 1e-9 <= np.log10(v) <= b + 1e-9]
        if len(values) < 2:
            values = [10.0**a, 10.0**b]
        return {"tickvals": [float(np.log10(v)) for v in values],
                "ticktext": [f"{v:.3g}" for v in values]}


def colour_scale(values: np.ndarray, *, diverging: bool = False, log: bool = False) -> ColourScale:
    """The colour scale for ``values`` (NaN ignored).

    Parameters
    ----------
    values : ndarray
        Values in the quantity's unit.
    diverging : bool
        Symmetric about zero on the diverging scale (changes against a baseline).
    log : bool
        Allow a log axis; used when the positive values span more than
        :data:`LOG_SPAN`.
    """
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    if diverging:
        m = float(np.abs(finite).max(initial=0.0)) or 1.0
        colours = sample_colorscale([list(s) for s in palette.DIVERGING],
                                    list((np.arange(DIVERGING_CLASSES) + 0.5) / DIVERGING_CLASSES))
        return ColourScale(-m, m, False, True, tuple(colours))
    colours = tuple(sample_colorscale([list(s) for s in palette.SEQUENTIAL],
                                      list((np.arange(SEQUENTIAL_CLASSES) + 0.5) / SEQUENTIAL_CLASSES)))
    positive = finite[finite > 0]
    if log and len(positive) and positive.max() > LOG_SPAN * positive.min():
        return ColourScale(float(positive.min()), float(positive.max()), True, False, colours)
    lo = float(finite.min()) if len(finite) else 0.0
    hi = float(finite.max()) if len(finite) else 1.0
    if hi <= lo:
        lo, hi = lo - 0.5 * (abs(lo) or 1.0), hi + 0.5 * (abs(hi) or 1.0)
    return ColourScale(lo, hi, False, False, colours)


def width_classes(radius_m: np.ndarray, count: int) -> np.ndarray:
    """Width class 0..count-1 of each vessel, evenly over log radius."""
    r = np.asarray(radius_m, dtype=float)
    ok = np.isfinite(r) & (r > 0)
    if not ok.any():
        return np.zeros(len(r), dtype=np.int64)
    logs = np.log10(np.where(ok, r, r[ok].min()))
    lo, hi = logs.min(), logs.max()
    if hi - lo < 1e-6:
        return np.full(len(r), count // 2, dtype=np.int64)
    return np.clip(np.floor((logs - lo) / (hi - lo) * count), 0, count - 1).astype(np.int64)
