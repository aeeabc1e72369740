"""The results' tables as one spreadsheet workbook (``tables.xlsx``), written with XlsxWriter.

Sheets: ``about`` first (title, the caution, how figures are rounded, and
every column of every sheet with its unit and meaning from the glossary),
then one sheet per table (``settlements``, ``zones``,
``<scenario>_settlements``, ``<scenario>_zones``), in the order given.  A
table sheet has two header rows, frozen: the column names (the glossary's
names, the same as the CSV files) and their units; filter buttons sit on
the units row.  Numbers are stored as numbers with a display format:
``0.0`` for minutes, kilometres and percent, ``#,##0`` for people.  Text is
always stored as text (a name starting with ``=`` stays a name, never a
formula).

The file is the same byte for byte for the same tables: its created and
modified properties are the run's fixed output time
(:func:`geo_reach.export.stamp.current_output_time`) and XlsxWriter stamps
the zip members with a fixed date.  It is written atomically.

References
----------
.. [1] ECMA-376 (2021). Office Open XML File Formats, 5th edition (SpreadsheetML).
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Mapping

import numpy as np
import pandas as pd

from .._meta import CAUTION, TOOL, __version__
from ..errors import OptionError, OutputError, where
from .atomic import atomic_path, check_output, write_error

__all__ = ["write_workbook", "sheet_names", "SHEET_NAME_MAX", "ABOUT", "ROW_LIMIT"]

#: Longest sheet name a spreadsheet accepts (ECMA-376 and common practice: 31 characters).
SHEET_NAME_MAX = 31
#: Name of the first sheet.
ABOUT = "about"
#: Rows a worksheet holds (ECMA-376 limit, 1,048,576); a longer table is left to its CSV file and said so.
ROW_LIMIT = 1_048_576
_BAD = re.compile(r"[\[\]:*?/\\]")
_FORMATS = {1: "0.0", 0: "#,##0"}

ROUNDING_NOTE = ("Minutes and kilometres to 0.1, people to whole numbers, shares in percent to 0.1 "
                 "(rounded one by one, so a change may differ by 0.1 from after minus before as shown).")
CSV_NOTE = ("Each table sheet is also a CSV file named like the sheet (settlements.csv ...): line 1 holds the "
            "caution, line 2 the column names (read it with pandas.read_csv(path, skiprows=1)).")


def sheet_names(stems) -> list[str]:
    """Sheet names for table stems: forbidden characters replaced, cut to 31 characters, made unique.

    >>> sheet_names(["settlements", "a_very_long_scenario_name_1234_settlements", "a_very_long_scenario_name_1234_zones"])
    ['settlements', 'a_very_long_scenario_name_1234_', 'a_very_long_scenario_name_123~2']
    """
    out: list[str] = []
    taken = {ABOUT}
    for stem in stems:
        base = _BAD.sub("_", str(stem)).strip("'") or "table"
        name = base[:SHEET_NAME_MAX]
        k = 1
        while name.lower() in taken:
            k += 1
            tail = f"~{k}"
            name = base[: SHEET_NAME_MAX - len(tail)] + tail
        taken.add(name.lower())
        out.append(name)
    return out


def _missing(v) -> bool:
    return v is None or v is pd.NA or (isinstance(v, (float, np.floating)) and not math.isfinite(float(v)))


def _width(values, header: str, unit: str) -> float:
    longest = max([len(header), len(unit)] + [len(str(v)) for v in values[:2000]])
    return float(min(max(longest, 6), 40) + 2)


def write_workbook(path, tables: Mapping[str, pd.DataFrame], *, title: str = "", notes=(),
                   overwrite: bool = True) -> Path:
    """Write the tables into one workbook, atomically.

    Parameters
    ----------
    path : str or Path
        The ``.xlsx`` file.
    tables : mapping of str to DataFrame
        Table stem (``settlements``, ``<scenario>_zones`` ...) -> the rounded
        table (:func:`geo_reach.export.tables.results_tables`).
    title : str
        The study's title, for the about sheet and the document properties.
    notes : sequence of str
        Extra lines for the about sheet.
    overwrite : bool
        Replace an existing file (the results folder is itself written atomically).

    Returns
    -------
    Path
    """
    import xlsxwriter

    from .stamp import current_output_time
    from .tables import term_for, unit_of

    path = Path(path)
    if path.suffix.lower() != ".xlsx":
        raise OptionError(f"{where(path)}a workbook file name must end in .xlsx; choose another name")
    check_output(path, overwrite, "workbook")
    too_long = [s for s in tables if len(tables[s]) + 2 > ROW_LIMIT]
    notes = [*notes, *(f"table {s} has {len(tables[s]):,} rows, more than a sheet holds: it is in {s}.csv only"
                       for s in too_long)]
    stems = [s for s in tables if s not in too_long]
    names = sheet_names(stems)
    stamp = current_output_time()
    with atomic_path(path, suffix=".xlsx") as tmp:
        try:
            wb = xlsxwriter.Workbook(str(tmp), {"strings_to_numbers": False, "strings_to_formulas": False,
                                                "strings_to_urls": False, "nan_inf_to_errors": False})
            wb.set_properties({"title": title or f"{TOOL} tables", "author": TOOL, "company": "",
                               "comments": CAUTION, "created": stamp.replace(tzinfo=None)})
            bold = wb.add_format({"bold": True})
            big = wb.add_format({"bold": True, "font_size": 14})
            warn = wb.add_format({"bold": True, "font_color": "#8a1c1c", "text_wrap": True})
            wrap = wb.add_format({"text_wrap": True, "valign": "top"})
            head = wb.add_format({"bold": True, "bottom": 1, "bg_color": "#e8eef2"})
            unit_fmt = wb.add_format({"italic": True, "font_color": "#555555", "bottom": 1, "bg_color": "#e8eef2"})
            text_fmt = wb.add_format({"num_format": "@"})
            num_fmts = {d: wb.add_format({"num_format": f}) for d, f in _FORMATS.items()}

            about = wb.add_worksheet(ABOUT)
            about.set_column(0, 0, 28)
            about.set_column(1, 1, 26)
            about.set_column(2, 2, 12)
            about.set_column(3, 3, 90)
            about.write_string(0, 0, title or f"{TOOL} results", big)
            about.merge_range(1, 0, 1, 3, CAUTION, warn)
            about.set_row(1, 32)
            rows = [("Tool", f"{TOOL} {__version__}"),
                    ("Output time (UTC)", stamp.strftime("%Y-%m-%d %H:%M:%S")),
                    ("Rounding", ROUNDING_NOTE), ("CSV files", CSV_NOTE)]
            rows += [("Note", str(n)) for n in notes]
            r = 3
            for k, v in rows:
                about.write_string(r, 0, k, bold)
                about.merge_range(r, 1, r, 3, v, wrap)
                r += 1
            r += 1
            for c, h in enumerate(("sheet", "column", "unit", "meaning")):
                about.write_string(r, c, h, head)
            r += 1
            for stem, sheet in zip(stems, names):
                for col in tables[stem].columns:
                    t = term_for(str(col))
                    about.write_string(r, 0, sheet)
                    about.write_string(r, 1, str(col))
                    about.write_string(r, 2, unit_of(str(col)))
                    about.write_string(r, 3, t.meaning if t is not None else "")
                    r += 1

            for stem, sheet in zip(stems, names):
                _table_sheet(wb.add_worksheet(sheet), tables[stem], head, unit_fmt, text_fmt, num_fmts)
            wb.close()
        except OSError:
            raise
        except Exception as err:  # XlsxWriter's own errors
            raise write_error(path, err) from err
    return path


def _table_sheet(ws, table: pd.DataFrame, head, unit_fmt, text_fmt, num_fmts) -> None:
    from .tables import round_rule, unit_of

    cols = [str(c) for c in table.columns]
    for c, name in enumerate(cols):
        unit = unit_of(name)
        ws.write_string(0, c, name, head)
        ws.write_string(1, c, unit, unit_fmt)
        values = table.iloc[:, c].tolist()
        digits = round_rule(name)
        fmt = num_fmts.get(digits) if digits is not None else None
        ws.set_column(c, c, _width(values, name, unit), fmt)
        for r, v in enumerate(values, start=2):
            if _missing(v):
                continue
            if isinstance(v, (bool, np.bool_)):
                ws.write_number(r, c, int(v), fmt)
            elif isinstance(v, (int, float, np.integer, np.floating)):
                ws.write_number(r, c, float(v), fmt)
            else:
                ws.write_string(r, c, str(v), text_fmt)
    ws.freeze_panes(2, 0)
    if cols:
        ws.autofilter(1, 0, 1 + len(table), len(cols) - 1)
