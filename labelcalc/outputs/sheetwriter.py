"""A small streaming writer for Office Open XML workbooks (.xlsx): sheets written row by row straight into the
zip, one sheet after the other.

Hand-written on purpose, for the range summary only (issue #12): the maintained libraries build an object per
cell.  Measured on 35,000 summary rows x 3 markets (about 1.7 million cells) on this project's 2-core machine,
openpyxl in write-only mode took 10-11 s (about six times the time of parsing the range's YAML files) and
XlsxWriter with ``constant_memory`` 11 s; this writer takes about 1.5 s.  Everything else that reads or writes
spreadsheets in labelcalc (sheet sources, the tests that read the summary back) uses openpyxl.

What it writes is the subset of SpreadsheetML (ECMA-376 Part 1) the summary needs and nothing more: numbers and
inline strings, one bold wrapped style for header rows, column widths, a frozen header (and lead columns).
Identical input gives identical bytes: fixed document dates and fixed zip entry dates.
"""

from __future__ import annotations

import math
import re
import zipfile
from collections.abc import Iterable, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from functools import lru_cache
from pathlib import Path
from xml.sax.saxutils import escape

FIXED_DATE = (2000, 1, 1, 0, 0, 0)
FIXED_W3CDTF = "2000-01-01T00:00:00Z"
#: characters XML 1.0 does not allow (control characters but tab, line feed and carriage return)
_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")
_NS_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_NS_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_NS_PKG = "http://schemas.openxmlformats.org/package/2006/relationships"
_CT_SHEET = "application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"
_HEAD = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
#: rows gathered before a write to the zip entry
_BATCH = 2000


def column_letter(j: int) -> str:
    """'A' for 0, 'Z' for 25, 'AA' for 26."""
    s = ""
    j += 1
    while j:
        j, r = divmod(j - 1, 26)
        s = chr(65 + r) + s
    return s


@lru_cache(maxsize=65536)
def _text_cell(text: str) -> str:
    """The part of an inline-string cell after its reference (a range repeats few distinct texts)."""
    clean = escape(_ILLEGAL.sub("", text))
    space = ' xml:space="preserve"' if clean != clean.strip() else ""
    return f' t="inlineStr"><is><t{space}>{clean}</t></is></c>'


def _tail(v) -> str:
    """What follows a cell's reference for value ``v`` (not None, not empty)."""
    if isinstance(v, bool):
        return f' t="b"><v>{int(v)}</v></c>'
    if isinstance(v, int):
        return f"><v>{v}</v></c>"
    if isinstance(v, float):
        if not math.isfinite(v):  # no number a spreadsheet can hold: shown as text
            return _text_cell(str(v))
        return f"><v>{v!r}</v></c>"
    return _text_cell(str(v))


class Sheet:
    """One worksheet, open for rows; made by :meth:`Workbook.sheet`, closed by the next sheet or the workbook."""

    def __init__(self, out, ncols: int, widths: Sequence[float], freeze: tuple[int, int], size: tuple[int, int] | None):
        self._out = out
        self._letters = [column_letter(j) for j in range(max(ncols, len(widths)))]
        self._row = 0
        self._buf: list[str] = []
        self._tails: dict = {}  # value -> what follows its cell reference
        self._writer = ThreadPoolExecutor(max_workers=1)  # one thread: batches reach the zip in order
        self._pending: Future | None = None
        cols, rows = freeze
        parts = [_HEAD, f'<worksheet xmlns="{_NS_MAIN}" xmlns:r="{_NS_REL}">']
        if size and size[0] and size[1]:  # readers that stream a sheet learn its extent here
            parts.append(f'<dimension ref="A1:{column_letter(size[1] - 1)}{size[0]}"/>')
        if cols or rows:
            top = f"{column_letter(cols)}{rows + 1}"
            pane = "bottomRight" if cols and rows else ("bottomLeft" if rows else "topRight")
            split = (f' xSplit="{cols}"' if cols else "") + (f' ySplit="{rows}"' if rows else "")
            parts.append(
                f'<sheetViews><sheetView workbookViewId="0"><pane{split} topLeftCell="{top}" activePane="{pane}"'
                f' state="frozen"/><selection pane="{pane}" activeCell="{top}" sqref="{top}"/></sheetView>'
                "</sheetViews>"
            )
        parts.append('<sheetFormatPr defaultRowHeight="15"/>')
        if widths:
            parts.append("<cols>")
            parts += [f'<col min="{j}" max="{j}" width="{w}" customWidth="1"/>' for j, w in enumerate(widths, 1)]
            parts.append("</cols>")
        parts.append("<sheetData>")
        out.write("".join(parts).encode("utf-8"))

    def header(self, titles: Iterable[str]) -> None:
        """A row in the header style (bold, wrapped, top-aligned)."""
        self._row += 1
        n = self._row
        cells = "".join(
            f'<c r="{self._letter(j)}{n}" s="1"{_text_cell(str(t))}'
            for j, t in enumerate(titles)
            if t not in (None, "")
        )
        self._buf.append(f'<row r="{n}">{cells}</row>')

    def _letter(self, j: int) -> str:
        while j >= len(self._letters):
            self._letters.append(column_letter(len(self._letters)))
        return self._letters[j]

    def append(self, values: Sequence) -> None:
        """A row of numbers and texts; ``None`` or an empty text leaves the cell empty."""
        self._row += 1
        n = self._row
        if len(values) > len(self._letters):
            self._letter(len(values) - 1)
        letters = self._letters
        tails = self._tails
        cells = [f'<row r="{n}">']
        for j, v in enumerate(values):
            if v is None or v == "":
                continue
            tail: str | None
            if v is True or v is False:  # equal to 1 and 0 as keys: never looked up
                tail = _tail(v)
            else:
                tail = tails.get(v)
                if tail is None:
                    tail = _tail(v)
                    if len(tails) < 200_000:  # a range repeats its figures; the cache stays bounded
                        tails[v] = tail
            cells.append(f'<c r="{letters[j]}{n}"{tail}')
        cells.append("</row>")
        self._buf.append("".join(cells))
        if len(self._buf) >= _BATCH:
            self._flush()

    def _flush(self) -> None:
        """Hand a batch of rows to the writing thread: zlib compresses outside the interpreter lock, so the
        next batch is formatted meanwhile.  At most one batch waits (memory stays bounded)."""
        if self._buf:
            data = "".join(self._buf).encode("utf-8")
            self._buf = []
            if self._pending is not None:
                self._pending.result()
            self._pending = self._writer.submit(self._out.write, data)

    def close(self) -> None:
        self._flush()
        if self._pending is not None:
            self._pending.result()
        self._writer.shutdown()
        self._out.write(b"</sheetData></worksheet>")
        self._out.close()


class Workbook:
    """A workbook written as it goes: ``sheet()`` opens the next sheet (closing the one before), ``close()``
    writes the package parts that name the sheets.  Use as a context manager."""

    def __init__(self, path: Path, creator: str = "labelcalc"):
        self._zip = zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=1)
        self._names: list[str] = []
        self._open: Sheet | None = None
        self._creator = creator

    def __enter__(self) -> Workbook:
        return self

    def __exit__(self, *exc) -> None:
        if exc[0] is None:
            self.close()
        else:
            self._zip.close()

    def _entry(self, name: str, large: bool = False):
        info = zipfile.ZipInfo(name, date_time=FIXED_DATE)
        info.compress_type = zipfile.ZIP_DEFLATED
        return self._zip.open(info, "w", force_zip64=large)

    def _put(self, name: str, text: str) -> None:
        with self._entry(name) as fh:
            fh.write(text.encode("utf-8"))

    def sheet(
        self,
        name: str,
        widths: Sequence[float] = (),
        freeze: tuple[int, int] = (0, 0),
        size: tuple[int, int] | None = None,
    ) -> Sheet:
        """Open a sheet named ``name`` (at most 31 characters, none of ``[]:*?/\\``) with column widths,
        ``freeze`` = (columns, rows) kept in view and, when known ahead, ``size`` = (rows, columns)."""
        if len(name) > 31 or re.search(r"[\[\]:*?/\\]", name) or name in self._names:
            raise ValueError(f"not a usable sheet name: {name!r}")
        if self._open is not None:
            self._open.close()
        self._names.append(name)
        entry = self._entry(f"xl/worksheets/sheet{len(self._names)}.xml", large=True)  # size not known ahead
        self._open = Sheet(entry, len(widths), widths, freeze, size)
        return self._open

    def close(self) -> None:
        if self._open is not None:
            self._open.close()
            self._open = None
        n = len(self._names)
        sheets = "".join(
            f'<Override PartName="/xl/worksheets/sheet{k}.xml" ContentType="{_CT_SHEET}"/>' for k in range(1, n + 1)
        )
        self._put(
            "[Content_Types].xml",
            _HEAD + '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
            '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
            '<Default Extension="xml" ContentType="application/xml"/>'
            '<Override PartName="/xl/workbook.xml" '
            'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
            '<Override PartName="/xl/styles.xml" '
            'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"/>'
            '<Override PartName="/docProps/core.xml" '
            'ContentType="application/vnd.openxmlformats-package.core-properties+xml"/>'
            '<Override PartName="/docProps/app.xml" '
            'ContentType="application/vnd.openxmlformats-officedocument.extended-properties+xml"/>'
            f"{sheets}</Types>",
        )
        self._put(
            "_rels/.rels",
            _HEAD + f'<Relationships xmlns="{_NS_PKG}">'
            '<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/'
            'officeDocument" Target="xl/workbook.xml"/>'
            '<Relationship Id="rId2" Type="http://schemas.openxmlformats.org/package/2006/relationships/metadata/'
            'core-properties" Target="docProps/core.xml"/>'
            '<Relationship Id="rId3" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/'
            'extended-properties" Target="docProps/app.xml"/></Relationships>',
        )
        self._put(
            "docProps/core.xml",
            _HEAD + '<cp:coreProperties xmlns:cp="http://schemas.openxmlformats.org/package/2006/metadata/'
            'core-properties" xmlns:dc="http://purl.org/dc/elements/1.1/" xmlns:dcterms="http://purl.org/dc/terms/"'
            ' xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">'
            f"<dc:creator>{escape(self._creator)}</dc:creator>"
            f'<dcterms:created xsi:type="dcterms:W3CDTF">{FIXED_W3CDTF}</dcterms:created>'
            f'<dcterms:modified xsi:type="dcterms:W3CDTF">{FIXED_W3CDTF}</dcterms:modified>'
            "</cp:coreProperties>",
        )
        self._put(
            "docProps/app.xml",
            _HEAD + '<Properties xmlns="http://schemas.openxmlformats.org/officeDocument/2006/extended-properties">'
            f"<Application>{escape(self._creator)}</Application></Properties>",
        )
        self._put(
            "xl/workbook.xml",
            _HEAD + f'<workbook xmlns="{_NS_MAIN}" xmlns:r="{_NS_REL}"><bookViews><workbookView/></bookViews>'
            "<sheets>"
            + "".join(
                f'<sheet name="{escape(nm, {chr(34): "&quot;"})}" sheetId="{k}" r:id="rId{k}"/>'
                for k, nm in enumerate(self._names, 1)
            )
            + "</sheets></workbook>",
        )
        self._put(
            "xl/_rels/workbook.xml.rels",
            _HEAD
            + f'<Relationships xmlns="{_NS_PKG}">'
            + "".join(
                f'<Relationship Id="rId{k}" Type="{_NS_REL}/worksheet" Target="worksheets/sheet{k}.xml"/>'
                for k in range(1, n + 1)
            )
            + f'<Relationship Id="rId{n + 1}" Type="{_NS_REL}/styles" Target="styles.xml"/></Relationships>',
        )
        self._put(
            "xl/styles.xml",
            _HEAD + f'<styleSheet xmlns="{_NS_MAIN}">'
            '<fonts count="2"><font><sz val="11"/><name val="Calibri"/><family val="2"/></font>'
            '<font><b/><sz val="11"/><name val="Calibri"/><family val="2"/></font></fonts>'
            '<fills count="2"><fill><patternFill patternType="none"/></fill>'
            '<fill><patternFill patternType="gray125"/></fill></fills>'
            '<borders count="1"><border><left/><right/><top/><bottom/><diagonal/></border></borders>'
            '<cellStyleXfs count="1"><xf numFmtId="0" fontId="0" fillId="0" borderId="0"/></cellStyleXfs>'
            '<cellXfs count="2"><xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>'
            '<xf numFmtId="0" fontId="1" fillId="0" borderId="0" xfId="0" applyFont="1" applyAlignment="1">'
            '<alignment vertical="top" wrapText="1"/></xf></cellXfs>'
            '<cellStyles count="1"><cellStyle name="Normal" xfId="0" builtinId="0"/></cellStyles>'
            "</styleSheet>",
        )
        self._zip.close()
