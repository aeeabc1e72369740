"""The one vocabulary: every field, file and summary key geo-reach writes, with its meaning and unit.

This module is data.  It is rendered into the README's glossary section
(:func:`markdown`), written into every GeoPackage as column descriptions in
the standard ``gpkg_data_columns`` table (OGC 12-128, schema extension), and
a test checks that every field of every output layer and every key of
``summary.json`` is here.

Rules the names follow:

* Units in names: ``_m`` metres, ``_km2`` square kilometres, ``_minutes``,
  ``_ms``, ``_kmh``, ``_pct`` percent.  Lengths are always metres in layers
  (tables for people show km); areas are always km².
* ``hub_minutes`` is the time of the trip between a place and its nearest
  hub (the travel-time surface's unit, always minutes, whatever the routing
  weight: reach bands, rings, zones and rasters are travel time); ``hub_cost``
  is the same on the network layers (and on settlements when the weight is
  not minutes), in the routing weight's unit (the layer description names
  the weight).  ``minutes`` alone is an edge's own travel time.
* A hub kind is a suffix: ``hub_minutes_clinic``, ``nearest_hub_clinic``.
* Scenario layers add ``_before``, ``_after`` and ``_change`` (after minus
  before; negative = faster).
* "edge" is a piece of the network between two nodes (options that pick
  them say ``--links``); "join" is where a trip from off the network enters
  it (``joinable`` nodes, ``join_x``); "access" is the off-network leg to
  that point.
* Plain words over jargon: ``searches`` not "SSSP runs", ``range_95_low``
  not "ci95_low", ``fit_error_*`` not "RSS"; :data:`RENAMED` lists the
  names earlier versions wrote.
* A term marked :attr:`Term.only` is written by one command or in one
  situation; every other term is in every full run's outputs
  (``tests/test_glossary_coverage.py`` checks both ways).
"""

from __future__ import annotations

import re

from .glossary_terms import PARTS, RENAMED, TERMS, Term   # the data, re-exported

__all__ = ["Term", "TERMS", "PARTS", "RENAMED", "REASON_WORDS", "lookup", "describe", "markdown", "reason_words",
           "update_readme", "START", "END"]

#: Why a region is weak, in the words every view uses (map, report, style, console).
REASON_WORDS = {
    "beyond_threshold": "far from every hub",
    "single_link": "hangs on one link",
    "no_hub": "network part with no hub",
}


def reason_words(reason: str, threshold_minutes: float | None = None) -> str:
    """A weak region's reason in plain words; with the threshold, ``beyond_threshold`` names it.

    >>> reason_words("beyond_threshold", 120)
    'more than 120 min from every hub'
    >>> reason_words("single_link")
    'hangs on one link'
    """
    if reason == "beyond_threshold" and threshold_minutes is not None:
        return f"more than {threshold_minutes:g} min from every hub"
    return REASON_WORDS.get(str(reason), str(reason).replace("_", " "))


#: Markers around the glossary section in README.md (the text between them is :func:`markdown`).
START = "<!-- glossary:start (generated from geo_reach/glossary.py; python -m geo_reach.glossary) -->"
END = "<!-- glossary:end -->"


def lookup(name: str, parts: dict | None = None) -> Term | None:
    """The term for a field or key name (exact names first, then the patterns).

    ``parts`` limits what each ``<part>`` of a pattern may stand for
    (``{"kind": ["clinic", "market"], "band": ["30", "60"]}``); a part not
    given stands for any name.

    >>> lookup("hub_minutes_clinic").name
    'hub_minutes_<kind>'
    >>> lookup("nearest_hub_name_clinic").name
    'nearest_hub_name_<kind>'
    >>> lookup("nonsense_field") is None
    True
    """
    for t in TERMS:
        if t.name == name:
            return t
    for suffix in ("_before", "_after", "_change"):
        if name.endswith(suffix) and lookup(name[: -len(suffix)], parts) is not None:
            return next(t for t in TERMS if t.name == f"<field>{suffix}")
    # patterns: the most specific first (the most literal text), so nearest_hub_name_clinic finds
    # nearest_hub_name_<kind>, not nearest_hub_<kind>
    hits = [t for t in TERMS if "<" in t.name and t.pattern_for(parts).match(name)]
    if not hits:
        return None
    return max(hits, key=lambda t: len(re.sub(r"<[^>]+>", "", t.name)))


def describe(name: str, parts: dict | None = None) -> str | None:
    """``meaning (unit)`` for a field, for column descriptions; None when the name is not in the glossary."""
    t = lookup(name, parts)
    if t is None:
        return None
    return f"{t.meaning} ({t.unit})" if t.unit else t.meaning


def markdown() -> str:
    """The glossary as a Markdown table (the README's glossary section is this text)."""
    rows = ["| name | meaning | unit | where |", "|---|---|---|---|"]
    for t in sorted(TERMS, key=lambda t: t.name.lstrip("<")):
        where = f"{t.where} (only: {t.only})" if t.only else t.where
        rows.append(f"| `{t.name}` | {t.meaning} | {t.unit} | {where} |")
    return "\n".join(rows) + "\n"


def update_readme(path) -> bool:
    """Rewrite the glossary section of the README at ``path``; True when it changed."""
    from pathlib import Path

    p = Path(path)
    text = p.read_text(encoding="utf-8")
    head, _, rest = text.partition(START)
    _, _, tail = rest.partition(END)
    new = f"{head}{START}\n{markdown()}{END}{tail}"
    if new != text:
        p.write_text(new, encoding="utf-8")
    return new != text


if __name__ == "__main__":   # python -m geo_reach.glossary: refresh README.md's glossary section
    import sys
    from pathlib import Path

    readme = Path(__file__).resolve().parents[1] / "README.md"
    print(f"{readme}: {'updated' if update_readme(readme) else 'already current'}", file=sys.stderr)
