"""The bulk rows of a worksheet written straight as SpreadsheetML, in the form openpyxl writes them.

openpyxl builds an object and an XML element per cell; at 100,000 slots that is most of
the workbook's time. The workbook module lets openpyxl write each sheet's header and first
row (so styles, validations, protection and everything else stay openpyxl's), then the rest
of the rows are made here as text with the style numbers openpyxl gave that first row, and
put into the sheet before </sheetData>. tests/test_workbook.py reads both kinds of rows
back with openpyxl and finds the same values and styles.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from typing import Final

from openpyxl.utils import get_column_letter

_ILLEGAL: Final = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f]")
_ROW_RE: Final = re.compile(r'<row r="(\d+)"[^>]*>(.*?)</row>', re.S)
_CELL_STYLE: Final = re.compile(r'<c r="[A-Z]+\d+"(?: s="(\d+)")?')


def writable(rows: Sequence[Sequence[object]]) -> bool:
    """Whether every value is one this writer writes as openpyxl would (no control characters, no floats)."""
    return all(v is None or type(v) is int or (type(v) is str and not _ILLEGAL.search(v)) for row in rows for v in row)


def _text(value: str) -> str:
    escaped = value.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")
    space = ' xml:space="preserve"' if value != value.strip() else ""
    return f"<is><t{space}>{escaped}</t></is>"


def rows_xml(rows: Sequence[Sequence[object]], styles: Sequence[str | None], first_row: int) -> str:
    """<row> elements for rows numbered from first_row; styles[i] is column i's style number or None."""
    letters = [get_column_letter(i + 1) for i in range(len(styles))]
    attrs = [f' s="{s}"' if s is not None else "" for s in styles]
    out = []
    for number, row in enumerate(rows, start=first_row):
        cells = []
        for letter, attr, value in zip(letters, attrs, row, strict=False):
            if value is None:
                cells.append(f'<c r="{letter}{number}"{attr} t="n" />')
            elif type(value) is int:
                cells.append(f'<c r="{letter}{number}"{attr} t="n"><v>{value}</v></c>')
            else:
                cells.append(f'<c r="{letter}{number}"{attr} t="inlineStr">{_text(str(value))}</c>')
        out.append(f'<row r="{number}">{"".join(cells)}</row>')
    return "".join(out)


def with_rows(sheet: bytes, rows: Sequence[Sequence[object]], sample_row: int) -> bytes:
    """The sheet's XML with rows added after sample_row, styled as openpyxl styled that row's cells."""
    text = sheet.decode("utf-8")
    sample = next(m for m in _ROW_RE.finditer(text) if int(m.group(1)) == sample_row)
    styles = [m.group(1) for m in _CELL_STYLE.finditer(sample.group(2))]
    added = rows_xml(rows, styles, sample_row + 1)
    end = text.index("</sheetData>")
    text = text[:end] + added + text[end:]
    last = sample_row + len(rows)
    text = re.sub(r'(<dimension ref="[A-Z]+\d+:[A-Z]+)\d+', lambda m: f"{m.group(1)}{last}", text, count=1)
    return text.encode("utf-8")
