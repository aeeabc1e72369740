"""Map layers of the study's analysis sections: link criticality (lines) and accessibility indices (points).

Each has a colour family of its own (:data:`~geo_reach.export.palette.CRITICAL_ANCHORS`,
:data:`~geo_reach.export.palette.INDEX_ANCHORS`), classes from the values
shown (:func:`~geo_reach.export.palette.criticality_classes`,
:func:`~geo_reach.export.palette.index_classes`) and plain popups.  Both
are today's view only and start switched off, so the travel-time layers
read first.
"""

from __future__ import annotations

import numpy as np

from .. import palette as P

__all__ = ["add_criticality", "add_indices", "SECTION_GROUPS"]

#: Group ids these layers use, in the order they are listed (indices groups may add "_2", "_3" ...).
SECTION_GROUPS = ("criticality", "indices")
#: The floating catchment measures are supply per person: shown per 1,000 people (common practice).
PER_1000 = ("2sfca", "e2sfca", "bfca")


def add_criticality(b) -> None:
    """Links coloured by the people cut off when each closes (links cutting nobody off are not drawn)."""
    from .build import _col, _fmt, _fnum, _num, _text

    c = b.m.criticality
    if c is None or not len(c):
        return
    f = b.frame("criticality", c)
    cut = _fnum(f, "people_cut_off")
    f = f[np.isfinite(cut) & (cut > 0)].reset_index(drop=True)
    cut = _fnum(f, "people_cut_off")
    classes = P.criticality_classes(cut)
    legend = [{"sw": "line", "c": k.colour, "t": k.label, "fam": "criticality"} for k in classes]
    b.group("criticality", "Link criticality: people cut off if the link closes", legend, on=False,
            note="Links whose closure cuts nobody off from a hub kind are not drawn. Model estimates.")
    if not len(f):
        return
    idx = P.classify(cut, classes)
    b.add("criticality", "today", "top", "line", f, cls=np.maximum(idx, 0).tolist(),
          styles=[{"c": k.colour, "w": 5} for k in classes], pick=1,
          cols={"name": _text(_col(f, "name", None), 120), "cut": _num(cut, 0),
                "rank": _num(_fnum(f, "rank"), 0), "added": _num(_fnum(f, "person_minutes_added"), 0),
                "edge": _num(_fnum(f, "edge_id"), 0)},
          popup={"head": "Link criticality", "title": "name",
                 "rows": [["People cut off if it closes", "cut", _fmt(digits=0)],
                          ["Rank (1 = most critical)", "rank", _fmt(digits=0)],
                          ["Person-minutes added for the others", "added", _fmt(digits=0)],
                          ["Edge id", "edge", _fmt(digits=0)]]})


def add_indices(b) -> list[str]:
    """Settlements coloured by their accessibility index: one group per measure and hub kind; returns the ids."""
    from .build import _col, _fmt, _fnum, _num, _text

    ix = b.m.indices
    if ix is None or not len(ix):
        return []
    f = b.frame("indices", ix)
    measure = np.asarray(_text(_col(f, "measure", None)), dtype=object)
    kind = np.asarray(_text(_col(f, "kind", None)), dtype=object)
    keys = list(dict.fromkeys(zip(measure.tolist(), kind.tolist())))
    ids = []
    for n, (m, k) in enumerate(keys):
        sel = np.array([(a, c) == (m, k) for a, c in zip(measure, kind)], bool)
        g = f[sel].reset_index(drop=True)
        scale, unit = (1000.0, "per 1,000 people") if m in PER_1000 else (1.0, "")
        val = _fnum(g, "index") * scale
        classes = P.index_classes(val, unit)
        # one family over every measure's group (the browser's colour check compares families)
        legend = [{"sw": "dot", "c": c.colour, "t": c.label, "fam": "index"} for c in classes]
        legend.append({"sw": "dot", "c": P.NO_VALUE, "t": "0: no hub within the catchment", "fam": "none"})
        gid = "indices" if n == 0 else f"indices_{n + 1}"
        what = " ".join(x for x in (m, f"({k})" if k else None) if x)
        b.group(gid, f"Access index{': ' + what if what else ''}", legend, on=False,
                note="Hub supply each settlement reaches (see the measure). Model estimates.")
        idx = P.classify(np.where(val > 0, val, np.nan), classes)
        styles = [{"fc": c.colour, "c": P.OUTLINE, "w": 1} for c in classes]
        styles.append({"fc": P.NO_VALUE, "c": P.OUTLINE, "w": 1})
        b.add(gid, "today", "pts", "point", g, cls=np.where(idx < 0, len(classes), idx).tolist(), styles=styles,
              size=[5.0] * len(g), tip="name",   # no labels: the settlements layer names the same places
              cols={"name": _text(_col(g, "name", None), 80), "index": _num(val, 3),
                    "within": _num(_fnum(g, "hubs_within"), 0), "near": _num(_fnum(g, "nearest_minutes"), 1)},
              popup={"head": f"Access index{': ' + what if what else ''}", "title": "name",
                     "rows": [["Index" + (f" ({unit})" if unit else ""), "index", _fmt(digits=3)],
                              ["Hubs within the catchment", "within",
                                                                   _fmt(digits=0)],
                              ["Minutes to the nearest hub", "near", _fmt("min", 1, none="no hub reachable")]]})
        ids.append(gid)
    return ids
