"""What a layer's fields hold: their kinds, counts and samples, and which fields could be ids, names,
populations or road classes - judged by their values as well as their names (for ``geo-reach init``)."""

from __future__ import annotations

import json
import math
import re
from dataclasses import dataclass

__all__ = ["FieldInfo", "field_infos", "describe_fields", "field_list", "id_candidates", "name_candidates",
           "population_candidates", "class_candidates", "ID_FIELDS", "NAME_FIELDS", "POPULATION_FIELDS",
           "MAX_CLASSES"]

POPULATION_FIELDS = ("population", "pop", "people", "inhabitants", "pop_total", "residents")
NAME_FIELDS = ("name", "title", "label")
ID_FIELDS = ("id", "code", "ref", "key")
#: At most this many class values are listed in a [lines.class_speeds] table.
MAX_CLASSES = 30


def _tokens(text: str) -> list[str]:
    text = re.sub(r"([a-z])([A-Z])", r"\1 \2", str(text))
    return [t for t in re.split(r"[^0-9a-z]+", text.lower()) if t]


def _says(tokens, words) -> str | None:
    """The first token starting with one of ``words`` (None if none)."""
    for t in tokens:
        for w in words:
            if t.startswith(w):
                return t
    return None


# ============================================================================ fields
def _field(frame, names):
    """The first column (case-insensitive) matching ``names`` in their order of preference."""
    cols = {str(c).lower(): c for c in frame.columns if c != getattr(frame.geometry, "name", "geometry")}
    for n in names:
        if n in cols:
            return cols[n]
    return None


def _fields(frame, names):
    cols = {str(c).lower(): c for c in frame.columns if c != getattr(frame.geometry, "name", "geometry")}
    return [cols[n] for n in names if n in cols]


def _norm_values(series):
    """Non-empty values as stripped lower-case strings (how the builder matches classes)."""
    s = series.dropna().astype(str).str.strip().str.lower()
    return s[s != ""]


def _positive_share(series) -> tuple[float, float | None, int]:
    import pandas as pd

    vals = series.dropna()
    n = len(vals)
    if n == 0:
        return 0.0, None, 0
    num = pd.to_numeric(vals, errors="coerce")
    ok = num[(num > 0) & num.notna()]
    return len(ok) / n, (float(ok.median()) if len(ok) else None), n


def _safe(text, limit=60) -> str:
    """User text fit for a one-line comment."""
    t = re.sub(r"[\x00-\x1f\x7f\s]+", " ", str(text)).strip()
    return t if len(t) <= limit else t[: limit - 3] + "..."


def _examples(values, k=4) -> str:
    return ", ".join(repr(_safe(v, 24)) for v in list(values)[:k])


def _q(text) -> str:
    """A TOML basic string."""
    return json.dumps(str(text), ensure_ascii=False).replace("\x7f", "\\u007f")


def _key(text) -> str:
    t = str(text)
    return t if re.fullmatch(r"[A-Za-z0-9_-]+", t) else _q(t)


def _n(k, word) -> str:
    return f"{k} {word}{'' if k == 1 else 's'}"


def _num(v) -> str:
    v = float(v)
    return f"{int(v)}" if v.is_integer() else f"{v:g}"


# ============================================================================ what a layer holds
#: At most this many fields are listed in a layer's comment block.
MAX_LISTED_FIELDS = 40
#: Words in a field name that suggest an id or a name (whole tokens, or a name ending in "id").
ID_WORDS = ("id", "code", "ref", "key", "pcode", "fid", "no", "num", "number", "uid", "gid")
NAME_WORDS = ("name", "nm", "title", "label", "nom", "nombre", "nome", "naam", "navn", "nimi")


@dataclass
class FieldInfo:
    """What one attribute field holds: its type, how many values are filled and distinct, a few samples."""

    name: str
    kind: str           # 'integer', 'decimal', 'text', 'yes/no', 'date' or 'other'
    filled: int
    distinct: int
    samples: list


def _kind_of(series) -> str:
    import pandas as pd

    dt = series.dtype
    if pd.api.types.is_bool_dtype(dt):
        return "yes/no"
    if pd.api.types.is_integer_dtype(dt):
        return "integer"
    if pd.api.types.is_float_dtype(dt):
        vals = series.dropna()
        return "integer" if len(vals) and (vals == vals.round()).all() and vals.abs().max() < 2 ** 53 else "decimal"
    if pd.api.types.is_datetime64_any_dtype(dt):
        return "date"
    if pd.api.types.is_string_dtype(dt) or dt == object:
        vals = series.dropna()
        if len(vals) and all(isinstance(v, str) for v in vals.iloc[:200]):
            return "text"
    return "other"


def field_infos(frame) -> list[FieldInfo]:
    """Every attribute field of ``frame`` (the geometry left out), in the layer's order."""
    geom = getattr(frame.geometry, "name", "geometry")
    out = []
    for c in frame.columns:
        if c == geom:
            continue
        col = frame[c]
        vals = col.dropna()
        kind = _kind_of(col)
        if kind == "text":
            vals = vals[vals.astype(str).str.strip() != ""]
        try:
            uniq = list(dict.fromkeys(vals.tolist()))
        except TypeError:   # unhashable values (lists, dicts)
            uniq = list(vals.astype(str).drop_duplicates())
        out.append(FieldInfo(str(c), kind, int(len(vals)), len(uniq), uniq[:3]))
    return out


def describe_fields(frame, label: str) -> list[str]:
    """Comment lines listing ``frame``'s fields with their type, filled and distinct counts and sample values."""
    infos = field_infos(frame)
    n = len(frame)
    head = f"Layer '{_safe(label)}': {_n(n, 'feature')}, {_n(len(infos), 'field')}" + (":" if infos else ".")
    out = [head]
    for f in infos[:MAX_LISTED_FIELDS]:
        sample = _sample_text(f) if f.samples else "(all empty)"
        out.append(f"  {_safe(f.name, 30):<22} {f.kind:<8} {f.filled}/{n} filled, {f.distinct} distinct: {sample}")
    if len(infos) > MAX_LISTED_FIELDS:
        out.append(f"  ... {len(infos) - MAX_LISTED_FIELDS} more fields not listed")
    return out


def _sample_text(f: FieldInfo) -> str:
    if f.kind in ("integer", "decimal"):
        return ", ".join(_num(v) if isinstance(v, (int, float)) and math.isfinite(float(v)) else _safe(v, 24)
                         for v in f.samples)
    return _examples(f.samples, 3)


def field_list(frame) -> str:
    """``name (type), ...`` for a one-line note."""
    infos = field_infos(frame)
    text = ", ".join(f"{_safe(f.name, 30)} ({f.kind})" for f in infos[:MAX_LISTED_FIELDS])
    return (text + (" ..." if len(infos) > MAX_LISTED_FIELDS else "")) or "none"


def _name_tokens(name) -> list[str]:
    return _tokens(str(name))


def _looks_like_name_text(vals) -> float:
    """Share of values that read as place names: letters, not only digits, no code-like digits mix."""
    s = vals.astype(str).str.strip()
    if len(s) == 0:
        return 0.0
    letters = s.map(lambda v: bool(re.search(r"[^\W\d_]{2,}", v)))
    digits = s.map(lambda v: sum(ch.isdigit() for ch in v) / max(len(v), 1))
    return float((letters & (digits < 0.3)).mean())


def _looks_like_code(vals) -> float:
    """Share of values that read as codes: no spaces, short, digits or upper-case letters."""
    s = vals.astype(str).str.strip()
    if len(s) == 0:
        return 0.0
    return float(s.map(lambda v: 0 < len(v) <= 24 and " " not in v and
                       (any(ch.isdigit() for ch in v) or v.isupper())).mean())


def id_candidates(frame, prefer=()) -> list[tuple[str, str]]:
    """Fields whose values are filled and unique for every feature, best first, each with why.

    Judged by content (unique, filled, integers or code-like text) and then by name (``*_id``,
    ``code`` ...); a field whose values read as names (letters, spaces) is left to the name field.
    """
    geom = frame.geometry.name
    n = len(frame)
    scored = []
    for c in frame.columns:
        if c == geom or n == 0:
            continue
        col = frame[c]
        if not col.notna().all():
            continue
        txt = col.astype(str).str.strip()
        if (txt == "").any() or txt.duplicated().any():
            continue
        kind = _kind_of(col)
        low = str(c).lower()
        toks = _name_tokens(c)
        named = low in prefer or low in ID_FIELDS or low.endswith("id") or any(t in ID_WORDS for t in toks)
        if kind in ("integer",):
            score, why = 2, "whole numbers"
        elif kind == "text" and _looks_like_code(col) >= 0.9:
            score, why = 2, "code-like text (no spaces, digits or capitals)"
        elif kind == "text" and _looks_like_name_text(col) >= 0.8 and not named:
            continue                                        # reads as names: the name field, not an id
        elif kind == "text":
            score, why = 1, "text"
        else:
            continue
        if named:
            score += 2
        if low in prefer:
            score += 2
        reason = (f"field '{_safe(c)}' is unique and filled for every feature ({why}"
                  + (", named like an id" if named else "") + ")")
        scored.append((-score, list(frame.columns).index(c), c, reason))
    scored.sort()
    return [(c, r) for _, _, c, r in scored]


def name_candidates(frame, exclude=()) -> list[tuple[str, str]]:
    """Text fields whose values read as names (mostly distinct words with letters), best first, each with why."""
    geom = frame.geometry.name
    n = len(frame)
    scored = []
    for c in frame.columns:
        if c == geom or c in exclude or n == 0 or _kind_of(frame[c]) != "text":
            continue
        vals = _norm_values(frame[c])
        if len(vals) < max(1, 0.8 * n):
            continue
        distinct = vals.nunique() / len(vals)
        wordy = _looks_like_name_text(frame[c].dropna())
        named = str(c).lower() in NAME_FIELDS or any(t in NAME_WORDS for t in _name_tokens(c))
        if wordy < 0.8 or (distinct < 0.6 and not named):
            continue
        score = (2 if named else 0) + distinct
        reason = (f"field '{_safe(c)}' reads as names: {distinct:.0%} distinct values with letters, e.g. "
                  f"{_examples(frame[c].dropna().unique(), 2)}")
        scored.append((-score, list(frame.columns).index(c), c, reason))
    scored.sort()
    return [(c, r) for _, _, c, r in scored]


def population_candidates(frame) -> list[tuple[str, str]]:
    """Numeric fields that may hold people: named like a population, or non-negative counts that are not ids."""
    import pandas as pd

    out = []
    for c in _fields(frame, POPULATION_FIELDS):
        share, med, filled = _positive_share(frame[c])
        if filled and share >= 0.5:
            out.append((c, f"field '{_safe(c)}' looks like a population: {share:.0%} of {filled} filled values "
                           "are positive numbers"))
    named = {c for c, _ in out}
    geom = frame.geometry.name
    for c in frame.columns:
        if c == geom or c in named or _kind_of(frame[c]) not in ("integer", "decimal"):
            continue
        num = pd.to_numeric(frame[c], errors="coerce").dropna()
        if len(num) < 0.8 * max(len(frame), 1) or (num < 0).any() or num.max() <= 0:
            continue
        ints = sorted(num.astype(int).tolist()) if (num == num.round()).all() else None
        if ints is not None and num.is_unique and ints == list(range(ints[0], ints[0] + len(ints))):
            continue                                          # 1, 2, 3 ...: a row number, not people
        if any(t in ID_WORDS + ("year", "area", "x", "y", "lat", "lon", "elev", "alt", "km", "m")
               for t in _name_tokens(c)):
            continue
        out.append((c, f"field '{_safe(c)}' holds non-negative numbers (median {_num(num.median())}), maybe "
                       "people: check"))
    return out


def class_candidates(frame, exclude=()) -> list[tuple[str, float, int, object]]:
    """Text fields that may hold a road class, judged by content: ``(field, share in the default table,
    distinct values, values)``, best first.  A class field repeats a few values; ids and names do not."""
    from ...network.costs import DEFAULT_CLASS_SPEEDS_KMH

    table = {k.lower() for k in DEFAULT_CLASS_SPEEDS_KMH}
    geom = frame.geometry.name
    out = []
    for c in frame.columns:
        if c == geom or c in exclude or _kind_of(frame[c]) != "text":
            continue
        vals = _norm_values(frame[c])
        if len(vals) == 0:
            continue
        known = float(vals.isin(table).mean())
        distinct = vals.nunique()
        repeated = distinct <= MAX_CLASSES and distinct <= max(2, len(vals) // 2)
        if known >= 0.5 or repeated:
            out.append((c, known, distinct, vals))
    cols = list(frame.columns)
    out.sort(key=lambda x: (-x[1], cols.index(x[0])))     # most values in the default table first, then layer order
    return out


