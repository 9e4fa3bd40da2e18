"""Workbooks written as raw XML, so that a sheet can declare what it likes (a dimension, a row
numbered twenty million, styled empty cells in the last column, formulas without a stored result).
Used by the loader tests and the hostile-input suite; all content synthetic."""

from __future__ import annotations

import io
import zipfile
from typing import Any, Iterable, Sequence
from xml.sax.saxutils import escape

_CONTENT_TYPES = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
    '<Types xmlns="http://schemas.openxmlformats.org/package/2006/content-types">'
    '<Default Extension="rels" ContentType="application/vnd.openxmlformats-package.relationships+xml"/>'
    '<Default Extension="xml" ContentType="application/xml"/>'
    '<Override PartName="/xl/workbook.xml" '
    'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml"/>'
    '{sheets}</Types>')
_SHEET_TYPE = ('<Override PartName="/xl/worksheets/sheet{i}.xml" '
               'ContentType="application/vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>')
_RELS = ('<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
         '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
         '<Relationship Id="rId1" Type="http://schemas.openxmlformats.org/officeDocument/2006/relationships/'
         'officeDocument" Target="xl/workbook.xml"/></Relationships>')
_NS = ('xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
       'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships"')


def letters(n: int) -> str:
    out = ""
    while n:
        n, r = divmod(n - 1, 26)
        out = chr(65 + r) + out
    return out


class Formula(str):
    """A formula cell; `Formula("A1*2")` has no stored result (as written by a program that does not
    calculate), `Formula("A1*2", 4)` stores 4."""

    def __new__(cls, text: str, result: Any = None):
        obj = super().__new__(cls, text)
        obj.result = result
        return obj


STYLED_EMPTY = object()  # a cell with a style and no value


def _cell(row: int, col: int, value: Any) -> str:
    ref = f"{letters(col)}{row}"
    if value is STYLED_EMPTY:
        return f'<c r="{ref}" s="1"/>'
    if isinstance(value, Formula):
        stored = "" if value.result is None else f"<v>{escape(str(value.result))}</v>"
        kind = ' t="str"' if isinstance(value.result, str) else ""
        return f'<c r="{ref}"{kind}><f>{escape(str(value))}</f>{stored}</c>'
    if isinstance(value, bool):
        return f'<c r="{ref}" t="b"><v>{int(value)}</v></c>'
    if isinstance(value, (int, float)):
        return f'<c r="{ref}"><v>{value!r}</v></c>'
    return f'<c r="{ref}" t="inlineStr"><is><t xml:space="preserve">{escape(str(value))}</t></is></c>'


def _sheet_parts(rows: Iterable[tuple[int, Sequence[tuple[int, Any]]]], dimension: str | None):
    yield f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<worksheet {_NS}>'
    if dimension:
        yield f'<dimension ref="{dimension}"/>'
    yield "<sheetData>"
    for r, cells in rows:
        yield f'<row r="{r}">' + "".join(_cell(r, c, v) for c, v in cells) + "</row>"
    yield "</sheetData></worksheet>"


def sheet_xml(rows: Iterable[tuple[int, Sequence[tuple[int, Any]]]], dimension: str | None = None) -> bytes:
    """A worksheet from (row number, [(column number, value), ...])."""
    return "".join(_sheet_parts(rows, dimension)).encode("utf-8")


def table_rows(header: Sequence[Any], records: Sequence[Sequence[Any]], start: int = 1):
    """(row, cells) pairs of a plain table; None cells left out."""
    out = [(start, [(j + 1, h) for j, h in enumerate(header) if h is not None])]
    for i, rec in enumerate(records):
        out.append((start + 1 + i, [(j + 1, v) for j, v in enumerate(rec) if v is not None]))
    return out


def _package(z: zipfile.ZipFile, names: Sequence[str]) -> None:
    z.writestr("[Content_Types].xml", _CONTENT_TYPES.format(
        sheets="".join(_SHEET_TYPE.format(i=i + 1) for i in range(len(names)))))
    z.writestr("_rels/.rels", _RELS)
    z.writestr("xl/workbook.xml", f'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n<workbook {_NS}>'
               "<sheets>" + "".join(f'<sheet name="{escape(name)}" sheetId="{i + 1}" r:id="rId{i + 1}"/>'
                                    for i, name in enumerate(names)) + "</sheets></workbook>")
    z.writestr("xl/_rels/workbook.xml.rels",
               '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'
               '<Relationships xmlns="http://schemas.openxmlformats.org/package/2006/relationships">'
               + "".join(f'<Relationship Id="rId{i + 1}" Type="http://schemas.openxmlformats.org/'
                         f'officeDocument/2006/relationships/worksheet" Target="worksheets/sheet{i + 1}.xml"/>'
                         for i in range(len(names))) + "</Relationships>")


def raw_xlsx(sheets: dict[str, bytes] | bytes) -> bytes:
    """A workbook of the given worksheets' XML (name -> sheet_xml(...)), in memory."""
    if isinstance(sheets, bytes):
        sheets = {"coding": sheets}
    buffer = io.BytesIO()
    with zipfile.ZipFile(buffer, "w", zipfile.ZIP_DEFLATED) as z:
        _package(z, list(sheets))
        for i, xml in enumerate(sheets.values()):
            z.writestr(f"xl/worksheets/sheet{i + 1}.xml", xml)
    return buffer.getvalue()


def write_xlsx(path, rows: Iterable[tuple[int, Sequence[tuple[int, Any]]]], *, dimension: str | None = None,
               name: str = "coding"):
    """A one-sheet workbook streamed to `path` (large generated sheets: the XML is never whole in memory)."""
    with zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as z:
        _package(z, [name])
        with z.open("xl/worksheets/sheet1.xml", "w", force_zip64=True) as fh:
            chunk = []
            for part in _sheet_parts(rows, dimension):
                chunk.append(part)
                if len(chunk) >= 10_000:
                    fh.write("".join(chunk).encode("utf-8"))
                    chunk = []
            fh.write("".join(chunk).encode("utf-8"))
    return path
