"""Colours and value classes shared by every output that draws: SLD style files and the HTML map.

Defined once here so a class means the same colour in a desktop GIS and in
the browser.

* **Cost** (minutes to the nearest hub, reach bands): a sequential scale
  sampled from matplotlib's ``viridis`` between 0.8 (light green, cheap) and
  0 (dark purple, dear).  The lightest 20 % (yellows) are left out because
  they vanish against a light map background; the part kept is still
  perceptually uniform and its lightness still falls monotonically, which is
  what keeps the order readable for colour-blind readers.
* **Change** (after minus before, minutes): a diverging scale sampled from
  ColorBrewer's ``PuOr`` (through matplotlib): purple = faster after the
  change, orange = slower, and a neutral grey for "no change worth showing"
  (``|delta| < 0.5`` minutes) so unchanged links stay visible on a light
  background.
* **Categories** (hub kind, reason a region is weak): the eight-colour
  Okabe-Ito set, distinguishable under the common forms of colour-vision
  deficiency.

Every class is a half-open interval ``lo <= value < hi`` (``None`` = open
end); missing values fall in no class and are drawn in :data:`NO_VALUE`.

References
----------
.. [1] Smith, N. and van der Walt, S. (2015). "A Better Default Colormap for
   Matplotlib" (the design of ``viridis``), SciPy 2015. (From memory.)
.. [2] Brewer, C. A. (2003). ColorBrewer.org, an online tool for selecting
   colour schemes for maps (Harrower, M. and Brewer, C. A., The Cartographic
   Journal 40(1), 27-37). ``PuOr`` is one of its colour-blind-safe diverging
   schemes.
.. [3] Okabe, M. and Ito, K. (2008). "Color Universal Design (CUD): how to
   make figures and presentations that are friendly to colorblind people".
   (The eight hex values are common practice; quoted from memory.)
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

__all__ = [
    "ColourClass",
    "QUALITATIVE",
    "NO_VALUE",
    "NEUTRAL",
    "BACKGROUND",
    "PATH_COLOUR",
    "ISSUE_COLOUR",
    "OUTLINE",
    "COST_BOUNDS_MINUTES",
    "CHANGE_BOUNDS_MINUTES",
    "CHANGE_NEUTRAL_MINUTES",
    "sequential",
    "diverging",
    "cost_classes",
    "band_classes",
    "band_colour",
    "change_classes",
    "category_colours",
    "classify",
    "colour_of",
]

#: Okabe-Ito colours (black left out: it is used for outlines), in the order they are handed out.
QUALITATIVE = ("#e69f00", "#56b4e9", "#009e73", "#f0e442", "#0072b2", "#d55e00", "#cc79a7")
#: Colour of a feature with no value for the classified field (e.g. no route to any hub).
NO_VALUE = "#a3a3a3"
#: Colour of the "no change" class of a change layer.
NEUTRAL = "#c4c4c4"
#: Plain map background used when no basemap is shown.
BACKGROUND = "#f3f2ee"
#: The diameter path (not a colour of the cost scale).
PATH_COLOUR = "#d55e00"
#: Network issues (points): fill colour; drawn with a dark outline.
ISSUE_COLOUR = "#cc79a7"
#: Outline of points and polygons.
OUTLINE = "#1e1e1e"

#: Candidate class bounds (minutes) for cost scales, by growing range: round numbers a reader expects.
COST_BOUNDS_MINUTES = (
    (1, 2, 5),
    (2, 5, 10),
    (5, 10, 15, 20),
    (5, 10, 15, 20, 30),
    (5, 10, 15, 30, 45),
    (10, 15, 30, 45, 60),
    (15, 30, 45, 60, 90),
    (15, 30, 60, 90, 120),
    (15, 30, 60, 120, 180),
    (15, 30, 60, 120, 240),
    (30, 60, 120, 240, 360),
    (30, 60, 120, 240, 480),
    (60, 120, 240, 480, 720),
    (60, 180, 360, 720, 1440),
    (120, 360, 720, 1440, 2880),
)
#: Changes smaller than this (minutes, either way) are drawn as "no change".
CHANGE_NEUTRAL_MINUTES = 0.5
#: Candidate class bounds (minutes, each side) for change scales, by growing range.
CHANGE_BOUNDS_MINUTES = (
    (CHANGE_NEUTRAL_MINUTES, 2, 5),
    (CHANGE_NEUTRAL_MINUTES, 5, 15),
    (CHANGE_NEUTRAL_MINUTES, 5, 30),
    (CHANGE_NEUTRAL_MINUTES, 15, 60),
    (CHANGE_NEUTRAL_MINUTES, 30, 120),
    (CHANGE_NEUTRAL_MINUTES, 60, 240),
    (CHANGE_NEUTRAL_MINUTES, 120, 480),
)

_SEQ_RANGE = (0.8, 0.0)  # viridis positions of the cheapest and the dearest class


@dataclass(frozen=True)
class ColourClass:
    """One class of a classified colour scale: ``lo <= value < hi``.

    Attributes
    ----------
    lo, hi : float or None
        Bounds in the field's unit; ``None`` is an open end.
    colour : str
        ``#rrggbb``.
    label : str
        Legend text, e.g. ``"15-30"`` or ``">= 240"`` (plain ASCII, no unit).
    """

    lo: float | None
    hi: float | None
    colour: str
    label: str

    def contains(self, value) -> bool:
        """Whether ``value`` falls in this class (``NaN`` is in none)."""
        if value is None or value != value:  # NaN
            return False
        return (self.lo is None or value >= self.lo) and (self.hi is None or value < self.hi)


def _hex(rgba) -> str:
    r, g, b = (int(round(float(c) * 255)) for c in rgba[:3])
    return f"#{r:02x}{g:02x}{b:02x}"


@lru_cache(maxsize=None)
def sequential(n: int) -> tuple[str, ...]:
    """``n`` colours of the cost scale, cheapest first (``#rrggbb``).

    Examples
    --------
    >>> sequential(3)
    ('#7ad151', '#2a788e', '#440154')
    """
    import matplotlib

    if n < 1:
        raise ValueError("n must be at least 1")
    cmap = matplotlib.colormaps["viridis"]
    pos = np.linspace(_SEQ_RANGE[0], _SEQ_RANGE[1], n) if n > 1 else [_SEQ_RANGE[0]]
    return tuple(_hex(cmap(float(p))) for p in pos)


@lru_cache(maxsize=None)
def diverging(k: int) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """``k`` colours for each side of the change scale.

    Returns
    -------
    faster, slower : tuple of str
        Each ordered from the smallest change to the largest; ``faster`` is
        the purple side of ``PuOr``, ``slower`` the orange side.
    """
    import matplotlib

    if k < 1:
        raise ValueError("k must be at least 1")
    cmap = matplotlib.colormaps["PuOr"]
    # Distance from the white centre of PuOr: start a little away from it so
    # the weakest change still shows on a light background.
    t = 0.5 * (0.3 + 0.7 * np.arange(1, k + 1) / k)
    faster = tuple(_hex(cmap(float(0.5 + x))) for x in t)
    slower = tuple(_hex(cmap(float(0.5 - x))) for x in t)
    return faster, slower


def _fmt(v: float) -> str:
    return f"{v:g}"


def _finite(values) -> np.ndarray:
    a = np.asarray(values, dtype=float).ravel() if values is not None else np.array([])
    return a[np.isfinite(a)]


def cost_classes(values) -> list[ColourClass]:
    """Classes for a cost in minutes (``hub_minutes``, ``minutes``), cheapest first.

    The bounds are the set in :data:`COST_BOUNDS_MINUTES` with the largest
    last bound below the largest value (the first set if none is); the last
    class is open (``>= bound``), so every value falls in a class.

    Parameters
    ----------
    values : array_like of float
        The values the scale must show (minutes); NaN ignored.

    Examples
    --------
    >>> [c.label for c in cost_classes([3, 12, 47, 95])]
    ['< 15', '15-30', '30-45', '45-60', '60-90', '>= 90']
    """
    a = _finite(values)
    vmax = float(a.max()) if a.size else 120.0
    fits = [b for b in COST_BOUNDS_MINUTES if b[-1] < vmax]
    bounds = [float(b) for b in (fits[-1] if fits else COST_BOUNDS_MINUTES[0])]
    return _classes_from_bounds(bounds, sequential(len(bounds) + 1))


def _classes_from_bounds(bounds: list[float], colours) -> list[ColourClass]:
    out = []
    for i, colour in enumerate(colours):
        lo = bounds[i - 1] if i > 0 else None
        hi = bounds[i] if i < len(bounds) else None
        if lo is None:
            label = f"< {_fmt(hi)}"
        elif hi is None:
            label = f">= {_fmt(lo)}"
        else:
            label = f"{_fmt(lo)}-{_fmt(hi)}"
        out.append(ColourClass(lo, hi, colour, label))
    return out


def band_classes(band_minutes) -> list[ColourClass]:
    """One class per distinct reach band, keyed by its upper bound ``band_minutes``.

    A band with upper bound ``b`` holds the places reached in less than ``b``
    minutes but not within the band below it, so its class spans
    ``previous bound <= minutes < b``.  A band feature is matched to its class
    by equality of ``band_minutes`` with the class's ``hi`` (see
    :func:`band_colour`), not by :func:`classify`.

    Examples
    --------
    >>> [c.label for c in band_classes([30, 15, 60, 15])]
    ['< 15', '15-30', '30-60']
    """
    vals = sorted({float(v) for v in _finite(band_minutes)})
    colours = sequential(len(vals)) if vals else ()
    out = []
    for i, (v, colour) in enumerate(zip(vals, colours)):
        lo = vals[i - 1] if i else None
        label = f"< {_fmt(v)}" if lo is None else f"{_fmt(lo)}-{_fmt(v)}"
        out.append(ColourClass(lo, v, colour, label))
    return out


def band_colour(band_minutes, classes: list[ColourClass]) -> list[str]:
    """Colour of each band feature: the class whose ``hi`` equals its ``band_minutes``.

    Examples
    --------
    >>> band_colour([15, 60, None], band_classes([15, 60]))
    ['#7ad151', '#440154', '#a3a3a3']
    """
    lookup = {c.hi: c.colour for c in classes}
    out = []
    for v in band_minutes:
        v = float(v) if v is not None else float("nan")
        out.append(lookup.get(v, NO_VALUE))
    return out


def change_classes(delta_minutes) -> list[ColourClass]:
    """Classes for a change in minutes (after minus before), most negative first.

    A neutral class holds ``|delta| < CHANGE_NEUTRAL_MINUTES``; each side has
    three classes, with the bounds from :data:`CHANGE_BOUNDS_MINUTES` whose
    last bound is the largest below the largest change.

    Examples
    --------
    >>> [c.label for c in change_classes([-12, 0, 3])]
    ['< -5', '-5 to -2', '-2 to -0.5', '-0.5 to 0.5', '0.5-2', '2-5', '>= 5']
    """
    a = np.abs(_finite(delta_minutes))
    vmax = float(a.max()) if a.size else 0.0
    fits = [b for b in CHANGE_BOUNDS_MINUTES if b[-1] < vmax]
    bounds = [float(b) for b in (fits[-1] if fits else CHANGE_BOUNDS_MINUTES[0])]
    k = len(bounds)
    faster, slower = diverging(k)
    out = []
    # faster side, most negative first
    for j in range(k - 1, -1, -1):
        hi = -bounds[j]
        lo = -bounds[j + 1] if j + 1 < k else None
        label = f"< {_fmt(hi)}" if lo is None else f"{_fmt(lo)} to {_fmt(hi)}"
        out.append(ColourClass(lo, hi, faster[j], label))
    n = CHANGE_NEUTRAL_MINUTES
    out.append(ColourClass(-n, n, NEUTRAL, f"{_fmt(-n)} to {_fmt(n)}"))
    for j in range(k):
        lo = bounds[j]
        hi = bounds[j + 1] if j + 1 < k else None
        label = f">= {_fmt(lo)}" if hi is None else f"{_fmt(lo)}-{_fmt(hi)}"
        out.append(ColourClass(lo, hi, slower[j], label))
    return out


def category_colours(values) -> dict[str, str]:
    """A colour for each distinct category (sorted by text), from :data:`QUALITATIVE`.

    More categories than colours: the rest share :data:`NO_VALUE` (grey), and
    the legend lists them as one group.

    Examples
    --------
    >>> category_colours(["clinic", "port", "clinic"])
    {'clinic': '#e69f00', 'port': '#56b4e9'}
    """
    cats = sorted({str(v) for v in values if v is not None and v == v})
    return {c: (QUALITATIVE[i] if i < len(QUALITATIVE) else NO_VALUE) for i, c in enumerate(cats)}


def classify(values, classes: list[ColourClass]) -> np.ndarray:
    """Index of the class of each value (``-1`` for NaN or no class).

    Examples
    --------
    >>> classify([0, 15, 29, float("nan"), 500], cost_classes([100])).tolist()
    [0, 1, 1, -1, 5]
    """
    a = np.asarray(values, dtype=float).ravel()
    out = np.full(a.shape, -1, dtype=np.int64)
    for i, c in enumerate(classes):
        m = np.isfinite(a)
        if c.lo is not None:
            m &= a >= c.lo
        if c.hi is not None:
            m &= a < c.hi
        out[m & (out < 0)] = i
    return out


def colour_of(values, classes: list[ColourClass]) -> list[str]:
    """The colour of each value (``NO_VALUE`` where it is in no class)."""
    return [classes[i].colour if i >= 0 else NO_VALUE for i in classify(values, classes)]
