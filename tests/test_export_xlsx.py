"""tables.xlsx: sheets, frozen header rows with units, number formats, text kept as text, same bytes each run.

The workbook is read back with openpyxl (an independent reader of the
ECMA-376 SpreadsheetML format; XlsxWriter writes it).  Sheet names follow
the spreadsheet limits of ECMA-376 (31 characters, no ``[]:*?/\\``; common
practice, from memory).
"""

from __future__ import annotations

import datetime as dt
import sys
from pathlib import Path

import numpy as np
import openpyxl
import pandas as pd
import pytest

sys.path.insert(0, str(Path(__file__).parent))
from helpers.kit_run import TITLE, run_named  # noqa: E402

from geo_reach import CAUTION  # noqa: E402
from geo_reach.errors import OutputError  # noqa: E402
from geo_reach.export import stamp  # noqa: E402
from geo_reach.export import xlsx as X  # noqa: E402
from geo_reach.export.tables import read_csv  # noqa: E402


@pytest.fixture(scope="module")
def kit(tmp_path_factory):
    return run_named(tmp_path_factory.mktemp("xlsx"))


def _sheet_frame(ws) -> pd.DataFrame:
    rows = list(ws.iter_rows(values_only=True))
    return pd.DataFrame(rows[2:], columns=rows[0])


def test_workbook_of_a_run(kit):
    _, out, _ = kit
    wb = openpyxl.load_workbook(out / "tables.xlsx")
    assert wb.sheetnames == ["about", "settlements", "zones", "far_link_settlements", "far_link_zones",
                             "new_clinic_settlements", "new_clinic_zones"]
    about = wb["about"]
    texts = [c for row in about.iter_rows(values_only=True) for c in row if isinstance(c, str)]
    assert CAUTION in texts and TITLE in texts            # markup in the title stays text
    for sheet in wb.sheetnames[1:]:
        ws = wb[sheet]
        assert ws.freeze_panes == "A3", sheet                      # both header rows frozen
        names = [c.value for c in ws[1]]
        units = [c.value or "" for c in ws[2]]
        csv_table = read_csv(out / f"{sheet}.csv")
        assert names == csv_table.columns.tolist(), sheet
        # every column is described on the about sheet with its unit
        described = {(r[0], r[1]): r[2] for r in about.iter_rows(values_only=True) if r[0] == sheet}
        assert {k[1] for k in described} == set(names)
        assert [described[(sheet, n)] or "" for n in names] == units
        # the values are the CSV's (text with the CSV's formula guard removed)
        frame = _sheet_frame(ws)
        for col in names:
            a = csv_table[col].tolist()
            b = frame[col].tolist()
            if csv_table[col].dtype.kind == "f":
                assert np.allclose(np.array(a, float), np.array([np.nan if v is None else v for v in b], float),
                                   equal_nan=True), (sheet, col)
            else:
                assert [str(v).removeprefix("'=") for v in a] == [str(v).removeprefix("=") for v in b], (sheet, col)
    ws = wb["settlements"]
    head = [c.value for c in ws[1]]
    assert [c.value for c in ws[2]][head.index("hub_minutes")] == "minutes"
    assert [c.value for c in ws[2]][head.index("population")] == "people"
    assert ws.cell(3, head.index("hub_minutes") + 1).number_format == "0.0"
    assert ws.cell(3, head.index("population") + 1).number_format == "#,##0"
    name = ws.cell(4, head.index("name") + 1)
    assert name.value == "=1+1" and name.data_type == "s"        # a name, never a formula
    assert wb["zones"].cell(3, 4).number_format == "0.0"          # share_within_15_pct


def test_same_tables_same_bytes_and_the_fixed_time(tmp_path, monkeypatch):
    t = {"settlements": pd.DataFrame({"settlement_id": [1, 2], "hub_minutes": [1.5, np.nan],
                                      "population": pd.array([3, pd.NA], dtype="Int64")})}
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    monkeypatch.setattr(stamp, "_current", None)
    a = X.write_workbook(tmp_path / "a.xlsx", t, title="T")
    b = X.write_workbook(tmp_path / "b.xlsx", t, title="T")
    assert a.read_bytes() == b.read_bytes()
    props = openpyxl.load_workbook(a).properties
    when = dt.datetime.fromtimestamp(1700000000, dt.timezone.utc).replace(tzinfo=None)
    assert props.created == when and props.modified == when
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000100")
    c = X.write_workbook(tmp_path / "c.xlsx", t, title="T")
    assert c.read_bytes() != a.read_bytes()
    ws = openpyxl.load_workbook(a)["settlements"]
    assert ws.cell(4, 2).value is None and ws.cell(4, 3).value is None     # missing stays empty


def test_sheet_names_fit_and_are_unique():
    names = X.sheet_names(["zones", "about", "a" * 40 + "_settlements", "a" * 40 + "_zones", "x[1]:y"])
    assert all(len(n) <= X.SHEET_NAME_MAX for n in names)
    assert len({n.lower() for n in names} | {"about"}) == len(names) + 1
    assert names[4] == "x_1__y"


def test_too_long_table_goes_to_csv_only_and_is_said(tmp_path, monkeypatch):
    monkeypatch.setattr(X, "ROW_LIMIT", 5)
    t = {"settlements": pd.DataFrame({"settlement_id": range(10)}), "zones": pd.DataFrame({"zone_id": [1]})}
    wb = openpyxl.load_workbook(X.write_workbook(tmp_path / "t.xlsx", t))
    assert wb.sheetnames == ["about", "zones"]
    texts = " ".join(str(c) for row in wb["about"].iter_rows(values_only=True) for c in row if c)
    assert "settlements.csv only" in texts


def test_a_failed_write_leaves_the_old_file(tmp_path, monkeypatch):
    import xlsxwriter

    path = tmp_path / "t.xlsx"
    path.write_bytes(b"old")

    def boom(self):
        raise RuntimeError("disk trouble")

    monkeypatch.setattr(xlsxwriter.Workbook, "close", boom)
    with pytest.raises(OutputError, match="t.xlsx"):
        X.write_workbook(path, {"zones": pd.DataFrame({"zone_id": [1]})})
    assert path.read_bytes() == b"old"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["t.xlsx"]
