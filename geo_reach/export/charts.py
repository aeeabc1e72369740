"""Charts written as PNG files (matplotlib, no display needed).

Every chart carries the caution line at its foot and is written atomically.
"""

from __future__ import annotations

import re

from .._meta import CAUTION
from .atomic import atomic_path

__all__ = ["plot_profile", "save_figure"]

_GLYPH = re.compile(r"Glyph (\d+) .*missing from")


def save_figure(fig, target, what: str, **kw) -> None:
    """``fig.savefig(target, **kw)``, with matplotlib's missing-glyph warnings (two lines each on stderr, one per
    character of a name the font cannot draw: emoji, control characters) gathered into one logged line.

    The chart is still written; those characters show as empty boxes.
    """
    import logging
    import warnings

    with warnings.catch_warnings(record=True) as seen:
        warnings.simplefilter("always")
        fig.savefig(target, **kw)
    missing = []
    for w in seen:
        m = _GLYPH.search(str(w.message)) if issubclass(w.category, UserWarning) else None
        if m is None:
            warnings.warn_explicit(w.message, w.category, w.filename, w.lineno)
        elif chr(int(m.group(1))) not in missing:
            missing.append(chr(int(m.group(1))))
    if missing:
        shown = " ".join(f"U+{ord(c):04X}" for c in missing[:8]) + (" ..." if len(missing) > 8 else "")
        logging.getLogger("geo_reach").warning(
            "%s: the plotting font has no glyph for %d character(s) of the names shown (%s); they are drawn as "
            "boxes in the chart (the map and tables keep them)", what, len(missing), shown)


def plot_profile(profile, path, *, title: str | None = None) -> None:
    """Write a reach profile as a PNG chart (two panels: nodes and length against cost).

    Parameters
    ----------
    profile : geo_reach.analysis.profile.ReachProfile
    path : str or Path
        Output PNG; written atomically.
    title : str, optional
        Drawn as plain text (matplotlib's mathtext is switched off for it).
    """
    import matplotlib

    matplotlib.use("Agg", force=False)
    import matplotlib.pyplot as plt

    w = profile.weight
    fig, (a1, a2) = plt.subplots(1, 2, figsize=(10, 4.2), constrained_layout=True)
    a1.plot(profile.cost, profile.nodes, marker="o", color="#1b6f8a")
    a1.set_xlabel(f"cost from source ({w.unit_name})")
    a1.set_ylabel("nodes within cost (count)")
    a1.grid(alpha=0.3)
    a2.plot(profile.cost, profile.length_m / 1000.0, marker="s", color="#b5651d")
    a2.set_xlabel(f"cost from source ({w.unit_name})")
    a2.set_ylabel("network length within cost (km)")
    a2.grid(alpha=0.3)
    g = profile.growth
    detail = (f"exponent {g.exponent:.2f}" if g.exponent is not None else
              f"rate {g.rate:.3g} per {w.unit}" if g.rate is not None else "too few steps to fit")
    src = (f"node {int(profile.sources[0])}" if len(profile.sources) == 1
           else f"mean of {len(profile.sources)} sources")
    fig.suptitle(title or f"Reach profile from {src}: growth {g.kind} ({detail})", usetex=False)
    fig._suptitle.set_parse_math(False)   # a title from the user's data is text, never markup
    fig.get_layout_engine().set(rect=(0, 0.05, 1, 0.95))  # keep the bottom strip for the caution
    fig.text(0.01, 0.01, CAUTION, fontsize=6.5, color="#555555")
    with atomic_path(path, suffix=".png") as tmp:
        save_figure(fig, tmp, "the reach profile chart", dpi=120, format="png")
    plt.close(fig)
