"""The hand-written workbook writer (labelcalc/outputs/sheetwriter.py) read back by openpyxl: values, styles,
widths, frozen panes, awkward text, and identical bytes for identical input.  The checks read the package the
way ECMA-376 Part 1 (SpreadsheetML) lays it out: inline strings, one cell format per header, <pane> for frozen
rows and columns."""

from __future__ import annotations

import zipfile
from xml.etree import ElementTree

import openpyxl
import pytest

from labelcalc.outputs.sheetwriter import Workbook, column_letter


def _write(path, rows, widths=(10, 20, 30)):
    with Workbook(path) as wb:
        ws = wb.sheet("US", widths, freeze=(2, 1), size=(len(rows) + 1, 3))
        ws.header(["Product id", "Fat [g]", "Note"])
        for r in rows:
            ws.append(r)
        plain = wb.sheet("errors", [18], freeze=(0, 1))
        plain.header(["Message"])
        plain.append(["none"])


def test_column_letters():
    assert [column_letter(j) for j in (0, 25, 26, 51, 52, 701, 702)] == ["A", "Z", "AA", "AZ", "BA", "ZZ", "AAA"]


def test_values_styles_widths_and_panes_read_back(tmp_path):
    path = tmp_path / "w.xlsx"
    rows = [
        ["a & b <c>", 8.3, "  leading and trailing  "],
        ["x", 0, None],
        ["ctrl\x01char", 1e-05, "quote \" and apostrophe '"],
        ["big", 12345678901, True],
    ]
    _write(path, rows)
    wb = openpyxl.load_workbook(path)
    assert wb.sheetnames == ["US", "errors"]
    ws = wb["US"]
    assert ws.freeze_panes == "C2" and wb["errors"].freeze_panes == "A2"
    assert [c.value for c in ws[1]] == ["Product id", "Fat [g]", "Note"]
    assert all(c.font.b and c.alignment.wrap_text for c in ws[1])
    assert not ws["A2"].font.b
    got = [[c.value for c in r] for r in ws.iter_rows(min_row=2)]
    assert got == [
        ["a & b <c>", 8.3, "  leading and trailing  "],
        ["x", 0, None],
        ["ctrlchar", 1e-05, "quote \" and apostrophe '"],  # a control character XML cannot carry is dropped
        ["big", 12345678901, True],
    ]
    assert [ws.column_dimensions[x].width for x in "ABC"] == [10, 20, 30]
    assert openpyxl.load_workbook(path, read_only=True)["US"].max_row == 5  # the <dimension> element


def test_every_part_is_well_formed_xml_with_fixed_dates(tmp_path):
    path = tmp_path / "w.xlsx"
    _write(path, [["x", 1.5, "y"]])
    with zipfile.ZipFile(path) as z:
        for info in z.infolist():
            assert info.date_time == (2000, 1, 1, 0, 0, 0)
            ElementTree.fromstring(z.read(info))  # raises on anything not well formed
        assert b"2000-01-01T00:00:00Z" in z.read("docProps/core.xml")


def test_identical_input_gives_identical_bytes(tmp_path):
    rows = [[f"p{i}", i / 7, "text"] for i in range(5000)]  # more than one batch of rows
    _write(tmp_path / "a.xlsx", rows)
    _write(tmp_path / "b.xlsx", rows)
    assert (tmp_path / "a.xlsx").read_bytes() == (tmp_path / "b.xlsx").read_bytes()
    assert openpyxl.load_workbook(tmp_path / "a.xlsx")["US"].cell(5001, 2).value == pytest.approx(4999 / 7)


@pytest.mark.parametrize("name", ["a" * 32, "a/b", "x[1]", "US"])
def test_unusable_sheet_names_are_refused(tmp_path, name):
    with Workbook(tmp_path / "w.xlsx") as wb:
        wb.sheet("US")
        with pytest.raises(ValueError, match="sheet name"):
            wb.sheet(name)


def test_non_finite_numbers_are_written_as_text(tmp_path):
    path = tmp_path / "w.xlsx"
    _write(path, [["x", float("nan"), float("inf")]])
    ws = openpyxl.load_workbook(path)["US"]
    assert [c.value for c in ws[2]] == ["x", "nan", "inf"]
