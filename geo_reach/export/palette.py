"""Colours, symbols and value classes shared by every output that draws: SLD style files and the HTML map.

Defined once here so a class means the same colour in a desktop GIS and in
the browser.  Each *family* of layers has hues of its own, so a colour never
means two things on one map:

==================  ===========================================  =====================
family              used for                                     hues (CIE LCh h)
==================  ===========================================  =====================
travel time         reach rings (fill) and settlements (dots):   yellow to teal, 105-215
                    minutes to the nearest hub, in the study's
                    band classes
network cost        links by cost to the nearest hub, in the     purple, 305-312
                    routing weight's unit
change              after minus before: faster / slower          blue 266-275 / orange 40-60
district share      share of people beyond the threshold         sand to brick, 38-78
weak-region reason  one fixed colour per reason                  magenta, dark blue, ochre
link criticality    links by the people cut off when each        pink to crimson-violet,
                    closes (those cutting nobody off not drawn)  318-330
access index        settlements by their accessibility index     olive to deep green,
                    (quantile classes of the values above 0)     102-114
water and barriers  fill                                         light blue, 238
single symbols      hubs (black shapes by kind), longest         black, green, yellow,
                    shortest trip, proposed line, network issues salmon
==================  ===========================================  =====================

Sequential ramps fall monotonically in lightness (CIE L*), which keeps their
order readable under every common colour-vision deficiency (common practice;
Brewer 2003 [2]_).  The ramps are defined by anchor colours in CIE LCh(ab)
and converted to sRGB here (:func:`lch_to_hex`, CIE 15 and IEC 61966-2-1
formulas).  The tests check every pair of legend entries that the map shows
together, from different families, with the CIEDE2000 colour difference
(Sharma et al. 2005 [1]_, as implemented by scikit-image): at least
:data:`MIN_DELTA_E_BETWEEN_FAMILIES`.

Hub kinds are told apart by shape (all hubs are black), not by colour: a
shape reads the same to everyone and leaves the hues to the families above.
The shapes are the well-known marks of OGC Symbology Encoding 1.1 (square,
triangle, star, cross, x), so the SLD files can draw the same symbol.

Every class is an interval of the value; missing values fall in no class and
are drawn in :data:`NO_VALUE`.

References
----------
.. [1] Sharma, G., Wu, W. and Dalal, E. N. (2005). "The CIEDE2000
   color-difference formula: implementation notes, supplementary test data,
   and mathematical observations". Color Research & Application 30(1), 21-30.
.. [2] Brewer, C. A. (2003). ColorBrewer.org: an online tool for selecting
   colour schemes for maps (Harrower, M. and Brewer, C. A., The Cartographic
   Journal 40(1), 27-37): sequential schemes stay readable to colour-blind
   readers when lightness changes monotonically.
.. [3] CIE 15:2004, Colorimetry, 3rd edition (CIELAB and its LCh form); IEC
   61966-2-1:1999, the sRGB colour space (transfer function and primaries).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ..glossary import REASON_WORDS

__all__ = [
    "ColourClass", "lch_to_hex", "ramp",
    "BACKGROUND", "NO_VALUE", "NEUTRAL", "OUTLINE", "HUB_COLOUR", "WATER", "WATER_EDGE", "PATH_COLOUR",
    "ISSUE_COLOUR", "PROPOSED_COLOUR", "REASON_COLOURS", "REASON_LABELS", "MIN_DELTA_E_BETWEEN_FAMILIES",
    "MIN_DELTA_E_WITHIN_RAMP", "TRAVEL_ANCHORS", "NETWORK_ANCHORS", "SHARE_ANCHORS", "FASTER_ANCHORS",
    "SLOWER_ANCHORS", "CRITICAL_ANCHORS", "INDEX_ANCHORS", "HUB_SHAPES", "COST_BOUNDS_MINUTES", "CHANGE_NEUTRAL_MINUTES", "SHARE_BOUNDS",
    "travel_classes", "cost_classes", "change_classes", "share_classes", "criticality_classes", "index_classes", "hub_symbols", "reason_colour",
    "classify", "colour_of",
]

# ---------------------------------------------------------------- colour arithmetic
_D65 = (0.95047, 1.0, 1.08883)
_XYZ_TO_RGB = np.array([[3.2404542, -1.5371385, -0.4985314],
                        [-0.9692660, 1.8760108, 0.0415560],
                        [0.0556434, -0.2040259, 1.0572252]])


def lch_to_hex(L: float, C: float, h: float) -> str:
    """An sRGB ``#rrggbb`` colour from CIE LCh(ab) (D65 white; out-of-gamut channels clipped).

    Parameters
    ----------
    L : float
        Lightness L*, 0-100.
    C : float
        Chroma C*ab.
    h : float
        Hue angle, degrees.

    Examples
    --------
    >>> lch_to_hex(100, 0, 0), lch_to_hex(0, 0, 0)
    ('#ffffff', '#000000')
    """
    a, b = C * math.cos(math.radians(h)), C * math.sin(math.radians(h))
    fy = (L + 16) / 116
    f = np.array([fy + a / 500, fy, fy - b / 200])
    d = 6 / 29
    xyz = np.where(f > d, f ** 3, 3 * d * d * (f - 4 / 29)) * np.array(_D65)
    lin = _XYZ_TO_RGB @ xyz
    srgb = np.where(lin <= 0.0031308, 12.92 * lin, 1.055 * np.clip(lin, 0, None) ** (1 / 2.4) - 0.055)
    r, g, bb = (int(round(float(np.clip(c, 0, 1)) * 255)) for c in srgb)
    return f"#{r:02x}{g:02x}{bb:02x}"


@lru_cache(maxsize=None)
def ramp(anchors: tuple, n: int) -> tuple[str, ...]:
    """``n`` colours sampled evenly along the piecewise-linear LCh path through ``anchors``.

    Examples
    --------
    >>> ramp(((90, 0, 0), (10, 0, 0)), 3)
    ('#e2e2e2', '#777777', '#1b1b1b')
    """
    if n < 1:
        raise ValueError("n must be at least 1")
    k = len(anchors) - 1
    if n == 1 or k == 0:
        return (lch_to_hex(*anchors[0]),) * n
    out = []
    for t in np.linspace(0.0, 1.0, n):
        s = t * k
        i = min(int(s), k - 1)
        f = s - i
        out.append(lch_to_hex(*(a + (b - a) * f for a, b in zip(anchors[i], anchors[i + 1]))))
    return tuple(out)


# ---------------------------------------------------------------- the families
#: Plain map background (no basemap).
BACKGROUND = "#f3f2ee"
#: A feature with no value (no hub reachable, no route): one grey with one meaning everywhere.
NO_VALUE = "#9a9a9a"
#: The "no change worth showing" class of a change layer.
NEUTRAL = "#c4c4c4"
#: Outlines of points and labels.
OUTLINE = "#1e1e1e"
#: Hubs (black shapes, one shape per kind).
HUB_COLOUR = "#1e1e1e"
#: Water and barriers (fill) and their edge.
WATER = lch_to_hex(80, 22, 238)
WATER_EDGE = lch_to_hex(62, 30, 240)
#: The longest shortest trip (diameter path), drawn dashed.
PATH_COLOUR = lch_to_hex(55, 50, 150)
#: Network issues (points and their clusters).
ISSUE_COLOUR = lch_to_hex(70, 55, 20)
#: The highlight under a scenario's proposed or changed lines.
PROPOSED_COLOUR = lch_to_hex(90, 85, 95)

#: Travel time to the nearest hub (rings and settlements), near (light yellow) to far (teal).
TRAVEL_ANCHORS = ((93, 30, 105), (82, 38, 135), (66, 30, 175), (48, 28, 215))
#: Network cost to the nearest hub, cheap (light purple) to dear (dark purple).
NETWORK_ANCHORS = ((72, 22, 305), (20, 45, 312))
#: District share of people beyond the threshold, few (sand) to many (brick).
SHARE_ANCHORS = ((91, 20, 78), (82, 32, 70), (73, 40, 60), (60, 50, 48), (47, 55, 38))
#: Change classes, smallest change first: faster (blue) and slower (orange).
FASTER_ANCHORS = ((68, 32, 266), (56, 45, 268), (38, 55, 275))
SLOWER_ANCHORS = ((78, 40, 60), (64, 60, 50), (48, 62, 40))

#: People cut off when a link closes, few (light pink) to many (deep crimson-violet).  Chosen by a search of
#: CIE LCh anchors for the largest least CIEDE2000 difference to every colour of the other families (13.9).
CRITICAL_ANCHORS = ((88, 50, 318), (40, 80, 330))
#: Accessibility index, low (light olive) to high (deep green); found by the same search (12.7).
INDEX_ANCHORS = ((75, 50, 102), (28, 80, 114))

#: Why a region is weak: a fixed colour per reason (never depends on which reasons occur).
REASON_COLOURS = {
    "beyond_threshold": lch_to_hex(52, 78, 355),
    "single_link": lch_to_hex(36, 50, 268),
    "no_hub": lch_to_hex(60, 55, 85),
}
#: Plain-language names of the reasons (the wording lives with the analysis).
REASON_LABELS = REASON_WORDS
_OTHER_REASON = lch_to_hex(45, 0, 0)

#: Least CIEDE2000 difference between two legend entries of different families shown together.
MIN_DELTA_E_BETWEEN_FAMILIES = 10.0
#: Least CIEDE2000 difference between neighbouring classes of one ramp (up to 8 classes).
MIN_DELTA_E_WITHIN_RAMP = 5.0

#: Hub shapes by kind, in the order kinds are handed them (OGC SE 1.1 well-known marks).
HUB_SHAPES = ("square", "triangle", "star", "cross", "x")


def reason_colour(reason) -> str:
    """The fixed colour of a weak-region reason (a dark grey for a reason this version does not know)."""
    return REASON_COLOURS.get(str(reason), _OTHER_REASON)


def hub_symbols(kinds) -> dict[str, tuple[str, str]]:
    """``kind -> (shape, fill)`` for the distinct kinds (sorted by text).

    The first five kinds get black :data:`HUB_SHAPES`; the next five the same
    shapes filled white (black outline); any more share a grey square.

    Examples
    --------
    >>> hub_symbols(["port", "clinic", "clinic"])
    {'clinic': ('square', '#1e1e1e'), 'port': ('triangle', '#1e1e1e')}
    """
    cats = sorted({str(v) for v in kinds if v is not None and v == v})
    out = {}
    n = len(HUB_SHAPES)
    for i, c in enumerate(cats):
        if i < n:
            out[c] = (HUB_SHAPES[i], HUB_COLOUR)
        elif i < 2 * n:
            out[c] = (HUB_SHAPES[i - n], "#ffffff")
        else:
            out[c] = ("square", NO_VALUE)
    return out


# ---------------------------------------------------------------- classes
@dataclass(frozen=True)
class ColourClass:
    """One class of a classified colour scale.

    Attributes
    ----------
    lo, hi : float or None
        Bounds in the field's unit; ``None`` is an open end.
    colour : str
        ``#rrggbb``.
    label : str
        Legend text with its unit, e.g. ``"30-60 min"`` or ``"beyond 120 min"``.
    upper_closed : bool
        ``lo < value <= hi`` when true (travel-time bands: a place *within* 30
        minutes has minutes <= 30); ``lo <= value < hi`` otherwise.
    """

    lo: float | None
    hi: float | None
    colour: str
    label: str
    upper_closed: bool = False

    def contains(self, value) -> bool:
        """Whether ``value`` falls in this class (``NaN`` is in none)."""
        if value is None or value != value:  # NaN
            return False
        if self.upper_closed:
            return (self.lo is None or value > self.lo) and (self.hi is None or value <= self.hi)
        return (self.lo is None or value >= self.lo) and (self.hi is None or value < self.hi)


def _fmt(v: float) -> str:
    return f"{v:,.10g}"


def _finite(values) -> np.ndarray:
    a = np.asarray(values, dtype=float).ravel() if values is not None else np.array([])
    return a[np.isfinite(a)]


def travel_classes(thresholds) -> list[ColourClass]:
    """Classes of minutes to the nearest hub for reach rings and settlements.

    One class per ring: within the first threshold, between each pair, and
    beyond the last (which also holds places no hub reaches, drawn in
    :data:`NO_VALUE` for points).  Upper bounds are inclusive, as for the
    bands: a place 30.0 minutes away is within 30.

    Parameters
    ----------
    thresholds : sequence of float
        Band limits, minutes (any order; repeats ignored).

    Examples
    --------
    >>> [c.label for c in travel_classes([60, 30, 120])]
    ['within 30 min', '30-60 min', '60-120 min', 'beyond 120 min']
    >>> travel_classes([30])[0].contains(30.0), travel_classes([30])[1].contains(30.0)
    (True, False)
    """
    ts = sorted({float(t) for t in thresholds})
    if not ts:
        raise ValueError("give at least one threshold")
    colours = ramp(TRAVEL_ANCHORS, len(ts) + 1)
    out = [ColourClass(None, ts[0], colours[0], f"within {_fmt(ts[0])} min", True)]
    for i in range(1, len(ts)):
        out.append(ColourClass(ts[i - 1], ts[i], colours[i], f"{_fmt(ts[i - 1])}-{_fmt(ts[i])} min", True))
    out.append(ColourClass(ts[-1], None, colours[-1], f"beyond {_fmt(ts[-1])} min", True))
    return out


#: Candidate class bounds (minutes) for cost scales in minutes, by growing range: round numbers a reader expects.
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


def _nice_step(span: float, parts: int) -> float:
    """The smallest 1-2-2.5-5 x 10^k step with ``parts`` steps reaching ``span``."""
    raw = max(span, 1e-12) / parts
    k = math.floor(math.log10(raw))
    for m in (1, 2, 2.5, 5, 10):
        if m * 10 ** k >= raw * (1 - 1e-12):
            return m * 10 ** k
    return 10 ** (k + 1)  # pragma: no cover - the loop always returns


def _bounds(vmax: float, unit: str, parts: int = 5) -> list[float]:
    if unit == "min":
        fits = [b for b in COST_BOUNDS_MINUTES if b[-1] < vmax]
        return [float(b) for b in (fits[-1] if fits else COST_BOUNDS_MINUTES[0])]
    step = _nice_step(vmax, parts)
    bounds = [step * i for i in range(1, parts + 1) if step * i < vmax]
    return [float(f"{b:.12g}") for b in (bounds or [step])]


def cost_classes(values, unit: str = "min") -> list[ColourClass]:
    """Classes of the cost to the nearest hub along the network, cheapest first.

    For minutes the bounds are the set in :data:`COST_BOUNDS_MINUTES` with the
    largest last bound below the largest value; for any other unit (``km``,
    ``hops``, ``ms``) up to five equal steps of 1, 2, 2.5 or 5 times a power
    of ten.  The first class is open below and the last open above, so every
    value falls in a class.

    Parameters
    ----------
    values : array_like of float
        The values the scale must show; NaN ignored.
    unit : str
        The unit label shown in the legend.

    Examples
    --------
    >>> [c.label for c in cost_classes([3, 12, 47, 95])]
    ['< 15 min', '15-30 min', '30-45 min', '45-60 min', '60-90 min', '>= 90 min']
    >>> [c.label for c in cost_classes([0.4, 7.5, 38.0], unit="km")]
    ['< 10 km', '10-20 km', '20-30 km', '>= 30 km']
    """
    a = _finite(values)
    vmax = float(a.max()) if a.size else (120.0 if unit == "min" else 1.0)
    bounds = _bounds(vmax, unit)
    colours = ramp(NETWORK_ANCHORS, len(bounds) + 1)
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
        out.append(ColourClass(lo, hi, colour, f"{label} {unit}".strip()))
    return out


#: Changes smaller than this (minutes, either way) are drawn as "no change".
CHANGE_NEUTRAL_MINUTES = 0.5
_CHANGE_BOUNDS_MINUTES = (
    (CHANGE_NEUTRAL_MINUTES, 2, 5),
    (CHANGE_NEUTRAL_MINUTES, 5, 15),
    (CHANGE_NEUTRAL_MINUTES, 5, 30),
    (CHANGE_NEUTRAL_MINUTES, 15, 60),
    (CHANGE_NEUTRAL_MINUTES, 30, 120),
    (CHANGE_NEUTRAL_MINUTES, 60, 240),
    (CHANGE_NEUTRAL_MINUTES, 120, 480),
)


def change_classes(values, unit: str = "min") -> list[ColourClass]:
    """Classes of a change (after minus before), most negative (faster, cheaper) first.

    A neutral class holds changes too small to show (0.5 minutes; for other
    units a tenth of the middle bound); each side has three classes.

    Examples
    --------
    >>> [c.label for c in change_classes([-12, 0, 3])]
    ['< -5 min', '-5 to -2 min', '-2 to -0.5 min', '-0.5 to 0.5 min', '0.5-2 min', '2-5 min', '>= 5 min']
    """
    a = np.abs(_finite(values))
    vmax = float(a.max()) if a.size else 0.0
    if unit == "min":
        fits = [b for b in _CHANGE_BOUNDS_MINUTES if b[-1] < vmax]
        bounds = [float(b) for b in (fits[-1] if fits else _CHANGE_BOUNDS_MINUTES[0])]
    else:
        step = _nice_step(vmax if vmax > 0 else 1.0, 2)
        bounds = [float(f"{step / 10:.12g}"), step, 2 * step]
    faster = ramp(FASTER_ANCHORS, 3)
    slower = ramp(SLOWER_ANCHORS, 3)
    k = len(bounds)
    out = []
    for j in range(k - 1, -1, -1):
        hi = -bounds[j]
        lo = -bounds[j + 1] if j + 1 < k else None
        label = f"< {_fmt(hi)}" if lo is None else f"{_fmt(lo)} to {_fmt(hi)}"
        out.append(ColourClass(lo, hi, faster[j], f"{label} {unit}"))
    n = bounds[0]
    out.append(ColourClass(-n, n, NEUTRAL, f"{_fmt(-n)} to {_fmt(n)} {unit}"))
    for j in range(k):
        lo = bounds[j]
        hi = bounds[j + 1] if j + 1 < k else None
        label = f">= {_fmt(lo)}" if hi is None else f"{_fmt(lo)}-{_fmt(hi)}"
        out.append(ColourClass(lo, hi, slower[j], f"{label} {unit}"))
    return out


#: Bounds of the district share classes (fractions of the district's people).
SHARE_BOUNDS = (0.10, 0.25, 0.50, 0.75)


def share_classes() -> list[ColourClass]:
    """Classes of a share of people (0..1), labelled in per cent.

    Examples
    --------
    >>> [c.label for c in share_classes()]
    ['under 10 %', '10-25 %', '25-50 %', '50-75 %', '75 % or more']
    """
    colours = ramp(SHARE_ANCHORS, len(SHARE_BOUNDS) + 1)
    b = SHARE_BOUNDS
    out = [ColourClass(None, b[0], colours[0], f"under {b[0] * 100:g} %")]
    for i in range(1, len(b)):
        out.append(ColourClass(b[i - 1], b[i], colours[i], f"{b[i - 1] * 100:g}-{b[i] * 100:g} %"))
    out.append(ColourClass(b[-1], None, colours[-1], f"{b[-1] * 100:g} % or more"))
    return out


def classify(values, classes: list[ColourClass]) -> np.ndarray:
    """Index of the class of each value (``-1`` for NaN or no class).

    Examples
    --------
    >>> classify([0, 15, 29, float("nan"), 500], cost_classes([100])).tolist()
    [0, 1, 1, -1, 5]
    >>> classify([30, 30.01, 200], travel_classes([30, 60])).tolist()
    [0, 1, 2]
    """
    a = np.asarray(values, dtype=float).ravel()
    out = np.full(a.shape, -1, dtype=np.int64)
    fin = np.isfinite(a)
    for i, c in enumerate(classes):
        m = fin.copy()
        if c.upper_closed:
            if c.lo is not None:
                m &= a > c.lo
            if c.hi is not None:
                m &= a <= c.hi
        else:
            if c.lo is not None:
                m &= a >= c.lo
            if c.hi is not None:
                m &= a < c.hi
        out[m & (out < 0)] = i
    return out


def colour_of(values, classes: list[ColourClass]) -> list[str]:
    """The colour of each value (``NO_VALUE`` where it is in no class)."""
    return [classes[i].colour if i >= 0 else NO_VALUE for i in classify(values, classes)]


def _quantile_bounds(values, k: int, digits: int) -> list[float]:
    """Up to ``k - 1`` increasing class bounds at the quantiles of the values above 0, rounded to
    ``digits`` significant figures (bounds that round together are merged)."""
    a = _finite(values)
    a = a[a > 0]
    if not a.size:
        return []
    qs = np.quantile(a, np.arange(1, k) / k)
    out: list[float] = []
    for q in qs:
        b = float(f"{q:.{digits}g}")
        if b > 0 and (not out or b > out[-1]) and b <= a.max():
            out.append(b)
    return out


def _quantile_classes(values, anchors, unit: str, k: int, digits: int, fmt) -> list[ColourClass]:
    bounds = _quantile_bounds(values, k, digits)
    colours = ramp(anchors, len(bounds) + 1) if bounds else ramp(anchors, 2)[-1:]
    out = []
    for i, colour in enumerate(colours):
        lo = bounds[i - 1] if i > 0 else 0.0
        hi = bounds[i] if i < len(bounds) else None
        label = f"{fmt(lo)} or more" if hi is None else f"{fmt(lo)} to under {fmt(hi)}"
        out.append(ColourClass(lo, hi, colour, f"{label} {unit}".strip()))
    out[0] = ColourClass(None, out[0].hi, out[0].colour,
                         (f"under {fmt(out[0].hi)} {unit}" if out[0].hi is not None else f"any {unit}").strip())
    return out


def criticality_classes(values) -> list[ColourClass]:
    """Classes of people cut off when a link closes (values above 0; quartiles, two significant figures).

    Examples
    --------
    >>> [c.label for c in criticality_classes([0, 10, 20, 30, 40, 400])]
    ['under 20 people', '20 to under 30 people', '30 to under 40 people', '40 or more people']
    """
    return _quantile_classes(values, CRITICAL_ANCHORS, "people", 4, 2, lambda v: f"{v:,.10g}")


def index_classes(values, unit: str = "") -> list[ColourClass]:
    """Classes of an accessibility index (values above 0; quintiles, three significant figures).

    Examples
    --------
    >>> [c.label for c in index_classes([0.5, 1, 2, 3, 4, 5, 6, 7, 8, 9])]
    ['under 1.8', '1.8 to under 3.6', '3.6 to under 5.4', '5.4 to under 7.2', '7.2 or more']
    """
    return _quantile_classes(values, INDEX_ANCHORS, unit, 5, 3, lambda v: f"{v:.3g}")
