"""A streaming XLSX writer: sheets of tables written chunk by chunk into the zip.

An XLSX file is a zip of SpreadsheetML parts (ECMA-376, Office Open XML, Part 1:
``[Content_Types].xml``, the package relationships, ``xl/workbook.xml``,
``xl/styles.xml`` and one ``xl/worksheets/sheetN.xml`` per sheet). Each sheet is
written straight into its zip member, a few thousand rows at a time, with every
cell's XML built column by column from the frame's arrays, so memory stays at one
chunk of text whatever the table's length and a 200,000-row table is written in
seconds (a cell-object writer needs minutes and gigabytes).

Cells: numbers as ``<v>`` with the shortest text that round-trips the float, dates
as serial day numbers (days since 1899-12-30, the 1900 date system) with a
``yyyy-mm-dd`` format, booleans as ``t="b"``, text as inline strings (never
formulas) after the spreadsheet-formula neutralisation of
:func:`optbench.report.csv.neutralise`; NaN, NaT and None are empty cells. Row 1 of
every sheet is the header (field names), frozen; the table starts at A1.
"""
from __future__ import annotations

import datetime as _dt
import io
import math
import re
import zipfile
from contextlib import contextmanager
from collections.abc import Iterable, Sequence
from typing import IO, Any
from xml.sax.saxutils import escape as _xml_escape

import numpy as np
import pandas as pd

from optbench.report.csv import neutralise

#: rows per chunk of sheet XML held in memory
CHUNK_ROWS = 4096

_EPOCH = np.datetime64("1899-12-30", "D")
# characters XML 1.0 does not allow (tab, newline and carriage return are allowed)
_ILLEGAL_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")

_NS = ('xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
       'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships"')
_HEAD = '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\n'


def column_letter(index: int) -> str:
    """Spreadsheet column name of a 1-based column index (1 -> A, 27 -> AA)."""
    name = ""
    while index:
        index, rest = divmod(index - 1, 26)
        name = chr(65 + rest) + name
    return name


def _text_xml(value: Any) -> str:
    text = _ILLEGAL_XML.sub("\ufffd", neutralise(str(value)))
    return _xml_escape(text, {"\r": "&#13;"})


class _Styles:
    """Cell formats: index 0 general, 1 bold header, then one per number format."""

    def __init__(self, formats: Sequence[str]) -> None:
        self.formats = list(dict.fromkeys(formats))
        self.index = {code: 2 + i for i, code in enumerate(self.formats)}

    def xml(self) -> str:
        num = "".join(f'<numFmt numFmtId="{164 + i}" formatCode="{_xml_escape(code)}"/>'
                      for i, code in enumerate(self.formats))
        xfs = ['<xf numFmtId="0" fontId="0" fillId="0" borderId="0" xfId="0"/>',
               '<xf numFmtId="0" fontId="1" fillId="0" borderId="0" xfId="0" '
               'applyFont="1"/>']
        xfs += [f'<xf numFmtId="{164 + i}" fontId="0" fillId="0" borderId="0" xfId="0" '
                'applyNumberFormat="1"/>' for i in range(len(self.formats))]
        return (f'{_HEAD}<styleSheet xmlns="http://schemas.openxmlformats.org/'
                f'spreadsheetml/2006/main"><numFmts count="{len(self.formats)}">{num}'
                '</numFmts><fonts count="2"><font><sz val="11"/><name val="Calibri"/></font>'
                '<font><b/><sz val="11"/><name val="Calibri"/></font></fonts>'
                '<fills count="2"><fill><patternFill patternType="none"/></fill>'
                '<fill><patternFill patternType="gray125"/></fill></fills>'
                '<borders count="1"><border><left/><right/><top/><bottom/><diagonal/>'
                '</border></borders><cellStyleXfs count="1"><xf numFmtId="0" fontId="0" '
                f'fillId="0" borderId="0"/></cellStyleXfs><cellXfs count="{len(xfs)}">'
                f'{"".join(xfs)}</cellXfs><cellStyles count="1"><cellStyle name="Normal" '
                'xfId="0" builtinId="0"/></cellStyles></styleSheet>')


def _column_cells(values: pd.Series, letter: str, rows: list[str], style: int) -> list[str]:
    """The ``<c>`` elements of one column for one chunk ("" for an empty cell).

    ``rows`` holds the row numbers as text; ``style`` the cell format index (0 none).
    """
    s = f' s="{style}"' if style else ""
    dtype = values.dtype
    if pd.api.types.is_bool_dtype(dtype):
        return [f'<c r="{letter}{r}" t="b"{s}><v>{int(v)}</v></c>'
                for r, v in zip(rows, values.to_numpy().tolist())]
    if pd.api.types.is_integer_dtype(dtype) and not isinstance(dtype, pd.CategoricalDtype):
        arr = values.to_numpy()
        if not np.issubdtype(arr.dtype, np.integer):       # nullable integers with NA
            return _mixed_cells(values.tolist(), letter, rows, s)
        return [f'<c r="{letter}{r}"{s}><v>{v}</v></c>' for r, v in zip(rows, arr.tolist())]
    if pd.api.types.is_float_dtype(dtype):
        arr = values.to_numpy(dtype=float)
        text = list(map(repr, arr.tolist()))   # shortest text that round-trips the float
        finite = np.isfinite(arr).tolist()
        return [f'<c r="{letter}{r}"{s}><v>{v}</v></c>' if ok else ""
                for r, v, ok in zip(rows, text, finite)]
    if pd.api.types.is_datetime64_any_dtype(dtype):
        arr = values.to_numpy().astype("datetime64[D]")
        ok = (~np.isnat(arr)).tolist()
        serial = (arr - _EPOCH).astype(np.int64).tolist()
        return [f'<c r="{letter}{r}"{s}><v>{v}</v></c>' if good else ""
                for r, v, good in zip(rows, serial, ok)]
    items = values.tolist()
    if all(type(v) is str for v in items):                # text: escaped once per value
        xml = {v: _text_xml(v) for v in set(items)}
        return [f'<c r="{letter}{r}" t="inlineStr"{s}><is><t xml:space="preserve">{xml[v]}'
                '</t></is></c>' for r, v in zip(rows, items)]
    return _mixed_cells(items, letter, rows, s)


def _mixed_cells(items: list, letter: str, rows: list[str], s: str) -> list[str]:
    """Cells of an object column: each value by its own type; text looked up once
    per distinct value."""
    text_cache: dict[str, str] = {}
    out = []
    for r, v in zip(rows, items):
        cell = _scalar_cell(v, f"{letter}{r}", s, text_cache)
        out.append(cell)
    return out


def _scalar_cell(v: Any, ref: str, s: str, text_cache: dict[str, str]) -> str:
    if v is None or v is pd.NaT:
        return ""
    if isinstance(v, (bool, np.bool_)):
        return f'<c r="{ref}" t="b"{s}><v>{int(v)}</v></c>'
    if isinstance(v, (int, np.integer)):
        return f'<c r="{ref}"{s}><v>{int(v)}</v></c>'
    if isinstance(v, (float, np.floating)):
        x = float(v)
        return f'<c r="{ref}"{s}><v>{x!r}</v></c>' if math.isfinite(x) else ""
    if isinstance(v, (_dt.date, np.datetime64)):
        day = np.datetime64(v, "D") if not isinstance(v, pd.Timestamp) else \
            np.datetime64(v.date(), "D")
        if np.isnat(day):
            return ""
        return f'<c r="{ref}"{s}><v>{int((day - _EPOCH).astype(np.int64))}</v></c>'
    if isinstance(v, float) and math.isnan(v):
        return ""
    key = str(v)
    xml = text_cache.get(key)
    if xml is None:
        xml = text_cache[key] = _text_xml(key)
    return f'<c r="{ref}" t="inlineStr"{s}><is><t xml:space="preserve">{xml}</t></is></c>'


def _date_objects(frame: pd.DataFrame) -> set[str]:
    """Object columns that hold only dates (written through the datetime fast path)."""
    found = set()
    for name in frame.columns:
        col = frame[name]
        if col.dtype == object:
            sample = col.dropna()
            if len(sample) and all(isinstance(v, _dt.date) for v in sample.iloc[:50]) and \
                    sample.map(lambda v: isinstance(v, _dt.date)).all():
                found.add(name)
    return found


class StreamingWorkbook:
    """Write sheets of tables into an XLSX zip, one chunk of rows at a time.

    >>> wb = StreamingWorkbook(buf, formats={"0.00%"})   # doctest: +SKIP
    >>> wb.add_table("Table", frames, formats={"atm_iv": "0.00%"})
    >>> wb.close()
    """

    def __init__(self, target: IO[bytes], formats: Iterable[str] = ()) -> None:
        self._zip = zipfile.ZipFile(target, "w", compression=zipfile.ZIP_DEFLATED,
                                    compresslevel=1)
        self._styles = _Styles(sorted(set(formats)))
        self._sheets: list[str] = []

    def _style(self, code: str | None) -> int:
        if not code:
            return 0
        if code not in self._styles.index:
            self._styles = _Styles(self._styles.formats + [code])
        return self._styles.index[code]

    @contextmanager
    def _sheet(self, name: str, columns: Sequence[str], n_rows: int):
        """Open sheet ``name`` (``n_rows`` below the header), write its header row;
        yields the text stream."""
        index = len(self._sheets) + 1
        self._sheets.append(name)
        with self._zip.open(f"xl/worksheets/sheet{index}.xml", "w", force_zip64=True) as raw:
            out = io.TextIOWrapper(raw, encoding="utf-8", newline="")
            widths = "".join(f'<col min="{j}" max="{j}" width="{max(10, min(28, len(c) + 2))}"'
                             ' customWidth="1"/>' for j, c in enumerate(columns, start=1))
            last = f"{column_letter(max(len(columns), 1))}{n_rows + 1}"
            out.write(f"{_HEAD}<worksheet {_NS}><dimension ref=\"A1:{last}\"/><sheetViews><sheetView workbookViewId=\"0\">"
                      '<pane ySplit="1" topLeftCell="A2" activePane="bottomLeft" '
                      'state="frozen"/></sheetView></sheetViews>'
                      f"{'<cols>' + widths + '</cols>' if columns else ''}<sheetData>")
            head = "".join(f'<c r="{column_letter(j)}1" t="inlineStr" s="1"><is>'
                           f'<t xml:space="preserve">{_text_xml(c)}</t></is></c>'
                           for j, c in enumerate(columns, start=1))
            out.write(f'<row r="1">{head}</row>')
            yield out
            out.write("</sheetData></worksheet>")
            out.flush()
            out.detach()

    def add_table(self, name: str, columns: Sequence[str],
                  frames: pd.DataFrame | Iterable[pd.DataFrame],
                  formats: dict[str, str] | None = None) -> None:
        """A sheet ``name`` with header ``columns`` at A1 and the rows of ``frames``
        (a DataFrame or several with these columns, written in order); ``formats``
        maps a column to its number format."""
        formats = formats or {}
        frames = [frames] if isinstance(frames, pd.DataFrame) else list(frames)
        columns = [str(c) for c in columns]
        letters = [column_letter(j) for j in range(1, len(columns) + 1)]
        styles = [self._style(formats.get(c)) for c in columns]
        with self._sheet(name, columns, sum(len(f) for f in frames)) as out:
            row = 2
            for frame in frames:
                frame = frame.set_axis([str(c) for c in frame.columns], axis=1)
                missing = [c for c in columns if c not in frame.columns]
                if missing:
                    frame = frame.assign(**{c: None for c in missing})
                dates = _date_objects(frame)
                for start in range(0, len(frame), CHUNK_ROWS):
                    part = frame.iloc[start:start + CHUNK_ROWS]
                    numbers = [str(r) for r in range(row, row + len(part))]
                    cells = []
                    for j, c in enumerate(columns):
                        col = part[c]
                        style = styles[j]
                        if c in dates:
                            col = pd.to_datetime(col)
                        if not style and pd.api.types.is_datetime64_any_dtype(col.dtype):
                            style = self._style("yyyy-mm-dd")
                        cells.append(_column_cells(col, letters[j], numbers, style))
                    out.write("".join(f'<row r="{r}">{"".join(c)}</row>'
                                      for r, *c in zip(numbers, *cells)))
                    row += len(part)

    def add_rows(self, name: str, columns: Sequence[str], rows: Iterable[Sequence[Any]],
                 value_formats: Sequence[str | None] | None = None) -> None:
        """A small sheet from plain rows, each value written by its own type;
        ``value_formats`` gives the number format of each row's last cell."""
        columns = [str(c) for c in columns]
        letters = [column_letter(j) for j in range(1, len(columns) + 1)]
        cache: dict[str, str] = {}
        rows = [list(r) for r in rows]
        with self._sheet(name, columns, len(rows)) as out:
            for i, values in enumerate(rows):
                r = i + 2
                last = len(values) - 1
                code = value_formats[i] if value_formats is not None else None
                cells = []
                for j, v in enumerate(values):
                    style = self._style(code) if j == last else 0
                    if style == 0 and isinstance(v, (_dt.date, np.datetime64)):
                        style = self._style("yyyy-mm-dd")
                    s = f' s="{style}"' if style else ""
                    cells.append(_scalar_cell(v, f"{letters[j]}{r}", s, cache))
                out.write(f'<row r="{r}">{"".join(cells)}</row>')

    def close(self) -> None:
        sheets = "".join(f'<sheet name="{_xml_escape(n[:31])}" sheetId="{i}" r:id="rId{i}"/>'
                         for i, n in enumerate(self._sheets, start=1))
        rels = "".join(f'<Relationship Id="rId{i}" Type="http://schemas.openxmlformats.org/'
                       'officeDocument/2006/relationships/worksheet" '
                       f'Target="worksheets/sheet{i}.xml"/>'
                       for i in range(1, len(self._sheets) + 1))
        n = len(self._sheets)
        rels += (f'<Relationship Id="rId{n + 1}" Type="http://schemas.openxmlformats.org/'
                 'officeDocument/2006/relationships/styles" Target="styles.xml"/>')
        overrides = "".join(
            f'<Override PartName="/xl/worksheets/sheet{i}.xml" ContentType="application/'
            'vnd.openxmlformats-officedocument.spreadsheetml.worksheet+xml"/>'
            for i in range(1, n + 1))
        z = self._zip
        z.writestr("[Content_Types].xml",
                   f'{_HEAD}<Types xmlns="http://schemas.openxmlformats.org/package/2006/'
                   'content-types"><Default Extension="rels" ContentType="application/'
                   'vnd.openxmlformats-package.relationships+xml"/><Default Extension="xml" '
                   'ContentType="application/xml"/><Override PartName="/xl/workbook.xml" '
                   'ContentType="application/vnd.openxmlformats-officedocument.'
                   'spreadsheetml.sheet.main+xml"/><Override PartName="/xl/styles.xml" '
                   'ContentType="application/vnd.openxmlformats-officedocument.'
                   f'spreadsheetml.styles+xml"/>{overrides}</Types>')
        z.writestr("_rels/.rels",
                   f'{_HEAD}<Relationships xmlns="http://schemas.openxmlformats.org/package/'
                   '2006/relationships"><Relationship Id="rId1" Type="http://schemas.'
                   'openxmlformats.org/officeDocument/2006/relationships/officeDocument" '
                   'Target="xl/workbook.xml"/></Relationships>')
        z.writestr("xl/workbook.xml",
                   f"{_HEAD}<workbook {_NS}><sheets>{sheets}</sheets></workbook>")
        z.writestr("xl/_rels/workbook.xml.rels",
                   f'{_HEAD}<Relationships xmlns="http://schemas.openxmlformats.org/package/'
                   f'2006/relationships">{rels}</Relationships>')
        z.writestr("xl/styles.xml", self._styles.xml())
        z.close()
