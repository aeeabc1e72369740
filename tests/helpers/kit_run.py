"""The studykit study run end to end into a results folder, with named settlements (for output tests).

The settlements get an id field and names that test how text is written:
a comma and quotes, a leading ``=`` (a formula to a spreadsheet), markup
and a non-ASCII letter.  Invented data: it exercises the writers only.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import geopandas as gpd

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from studykit import write_study  # noqa: E402

#: A study title and a scenario description that are markup, to check they are shown as text.
TITLE = '<i>Grid</i> & "town" <script>alert(1)</script>'
DESCRIPTION = "<img src=x onerror=alert(2)> a road to the far corner"

#: Settlement names of the kit, in feature order (ids 11..14).
NAMES = ['Brook, "Old" End', "=1+1", "<i>Holm</i>", "Åsvik"]
IDS = [11, 12, 13, 14]


def named_study(folder: Path) -> Path:
    """The studykit study with settlement ids (``sid``) and names (``label``)."""
    p = write_study(folder)
    st = gpd.read_file(folder / "net.gpkg", layer="settlements")
    st["sid"] = IDS
    st["label"] = NAMES
    st.to_file(folder / "net.gpkg", layer="settlements", driver="GPKG")
    text = p.read_text().replace('population_field = "population"',
                                 'population_field = "population"\nid_field = "sid"\nname_field = "label"')
    text = text.replace('title = "Grid town"', f"title = {json.dumps(TITLE)}")
    text = text.replace('description = "a road to the far corner"', f"description = {json.dumps(DESCRIPTION)}")
    p.write_text(text)
    return p


def run_named(folder: Path) -> tuple[Path, Path, dict]:
    """Run the named study into ``folder/out``; return (study path, results folder, summary)."""
    from geo_reach.pipeline import run_study
    from geo_reach.study import load_study

    p = named_study(folder / "kit")
    out = folder / "out"
    summary = run_study(load_study(p), out)
    return p, out, summary
