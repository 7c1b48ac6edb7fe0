"""A small streaming writer for .xlsx workbooks (Office Open XML, ECMA-376).

Range summaries have tens of thousands of rows; building them cell by cell in a general
spreadsheet library takes longer than the labelling itself.  This writer streams each sheet
as XML into the zip container, with inline strings and plain numbers, which is all a summary
table needs.  Reading workbooks is left to openpyxl.
"""

from __future__ import annotations

import zipfile
from pathlib import Path
from xml.sax.saxutils import escape

_CT = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
    '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
    '<Default Extension="xml" ContentType="application/xml"/>'
    '<Override PartName="/xl/workbook.xml" '
    'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
    "{sheets}</Types>"
)
_SHEET_CT = (
    '<Override PartName="/xl/worksheets/sheet{i}.xml" '
    'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
)
_RELS = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
    '<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument" '
    'Target="xl/workbook.xml"/></Relationships>'
)
_WB = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    '<workbook xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
    'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships"><sheets>{sheets}</sheets></workbook>'
)
_WB_SHEET = '<sheet name="{name}" sheetId="{i}" r:id="rId{i}"/>'
_WB_RELS = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">{rels}</Relationships>'
)
_WB_REL = (
    '<Relationship Id="rId{i}" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/worksheet" '
    'Target="worksheets/sheet{i}.xml"/>'
)


def _col(n: int) -> str:
    s = ""
    n += 1
    while n:
        n, r = divmod(n - 1, 26)
        s = chr(65 + r) + s
    return s


def _cell(ref: str, v) -> str:
    if v is None or v == "":
        return ""
    if isinstance(v, bool):
        return f'<c r="{ref}" t="b"><v>{int(v)}</v></c>'
    if isinstance(v, (int, float)):
        if v != v:  # NaN
            return ""
        return f'<c r="{ref}"><v>{v!r}</v></c>'
    return f'<c r="{ref}" t="inlineStr"><is><t xml:space="preserve">{escape(str(v))}</t></is></c>'


def write_workbook(path: Path, sheets: dict[str, list[dict]]) -> None:
    """Write sheets (name -> rows as dicts; columns in first-seen order) to an .xlsx file."""
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=1) as z:
        names = list(sheets)
        z.writestr(
            "[Content_Types].xml", _CT.format(sheets="".join(_SHEET_CT.format(i=i + 1) for i in range(len(names))))
        )
        z.writestr("_rels/.rels", _RELS)
        z.writestr(
            "xl/workbook.xml",
            _WB.format(sheets="".join(_WB_SHEET.format(name=escape(n[:31]), i=i + 1) for i, n in enumerate(names))),
        )
        z.writestr(
            "xl/_rels/workbook.xml.rels",
            _WB_RELS.format(rels="".join(_WB_REL.format(i=i + 1) for i in range(len(names)))),
        )
        for i, name in enumerate(names):
            rows = sheets[name]
            cols: list[str] = []
            seen: set[str] = set()
            for r in rows:
                for k in r:
                    if k not in seen:
                        seen.add(k)
                        cols.append(k)
            cols = cols or ["(none)"]
            letters = [_col(j) for j in range(len(cols))]
            with z.open(f"xl/worksheets/sheet{i + 1}.xml", "w") as fh:
                fh.write(
                    b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
                    b'<worksheet xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"><sheetData>'
                )
                head = "".join(_cell(f"{letters[j]}1", c) for j, c in enumerate(cols))
                fh.write(f'<row r="1">{head}</row>'.encode())
                buf = []
                for n, r in enumerate(rows, start=2):
                    cells = "".join(_cell(f"{letters[j]}{n}", r.get(c)) for j, c in enumerate(cols))
                    buf.append(f'<row r="{n}">{cells}</row>')
                    if len(buf) >= 2000:
                        fh.write("".join(buf).encode())
                        buf = []
                fh.write("".join(buf).encode())
                fh.write(b"</sheetData></worksheet>")
