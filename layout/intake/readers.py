"""Read returned workbooks and CSV files, read-only, into plain rows of cells.

Every file is first looked at by layout.intake.safety (its real format, archive limits, no
DTD). Workbooks are then read with python-calamine (values, including cached results of
formulas); openpyxl in read-only mode (which parses through defusedxml) is opened only when
a sheet holds formulas, to say which cells they are. CSV files may be UTF-8 with or without
a byte-order mark, comma, semicolon or tab separated; semicolon files may use decimal commas.
"""

from __future__ import annotations

import csv
import io
import zipfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Final

from python_calamine import CalamineWorkbook

from layout.errors import UnreadableFile
from layout.intake.safety import DEFAULT_LIMITS, Limits, inspect_zip, refuse_non_workbook, sniff
from layout.meta import HIDDEN_SHEET

HEADER_SEARCH_ROWS: Final = 20


@dataclass
class ReturnedTable:
    """The cells of one returned file, with spreadsheet row numbers."""

    file: str
    headers: list[str]
    header_row: int
    rows: list[tuple[int, list[Any]]]
    fingerprint: str | None = None
    study: str | None = None
    formulas: set[tuple[int, int]] = field(default_factory=set)
    decimal_comma: bool = False
    sheet: str | None = None


def _unreadable(p: Path, message: str) -> UnreadableFile:
    return UnreadableFile.at(str(p), "", message)


def read_returned(path: str | Path, limits: Limits = DEFAULT_LIMITS) -> ReturnedTable:
    """Read an .xlsx, .xlsm, .ods or .csv return; UnreadableFile when that cannot be done safely.

    An .xlsm is read for its values only; no macro is ever run (nothing in a file is).
    """
    return open_returned(path, limits)()


def open_returned(path: str | Path, limits: Limits = DEFAULT_LIMITS) -> Callable[[], ReturnedTable]:
    """The safety checks of read_returned, done now (UnreadableFile if they fail), and its parse, to be called.

    For a workbook the parse is calamine's, which releases the GIL, so it may run in another thread while
    this one works; nothing of the file is parsed before it has passed the checks.
    """
    p = Path(path)
    if not p.is_file():
        raise _unreadable(p, "no such file" if not p.exists() else "not a file")
    suffix = p.suffix.lower()
    if suffix in (".xlsx", ".xlsm"):
        formulas = inspect_zip(p, limits)  # the zip was scanned once, formulas noted
        return lambda: _read_book(p, formulas=formulas)
    if suffix == ".ods":
        inspect_zip(p, limits)
        return lambda: _read_ods(p)
    if suffix in (".xls", ".xlsb"):
        # binary formats: formulas cannot be told from typed values there, and their parsers are old attack surface
        raise _unreadable(p, f"is in the binary Excel format ({suffix}), which is not read; open it and save as .xlsx")
    if suffix in (".csv", ".txt", ".tsv"):
        return lambda: _read_csv(p, limits)
    raise _unreadable(p, f"not a workbook or CSV file (ending {suffix or 'none'}); return .xlsx, .ods or .csv files")


def _read_ods(p: Path) -> ReturnedTable:
    table = _read_book(p, formulas=False)
    try:
        table.formulas = ods_formula_cells(p, table.sheet or "")
    except Exception:  # the values were read; only the formula warning is lost
        table.formulas = set()
    return table


def _header_at(rows: list[list[Any]]) -> int:
    """Index of the first row holding a 'code' cell (people add title rows above)."""
    for i, row in enumerate(rows[:HEADER_SEARCH_ROWS]):
        if any(isinstance(c, str) and c.strip().lower() == "code" for c in row):
            return i
    return -1


def _table(file: str, rows: list[list[Any]], **extra: Any) -> ReturnedTable:
    at = _header_at(rows)
    if at < 0:
        return ReturnedTable(file, [], 0, [], **extra)
    width = max(map(len, rows[at:]))
    # cells beyond the header row still count: they become added columns, so nothing typed is lost
    headers = ["" if c is None else str(c) for c in rows[at]] + [""] * (width - len(rows[at]))
    body = list(zip(range(at + 2, len(rows) + 1), rows[at + 1 :], strict=True))  # rows are lists; never changed here
    return ReturnedTable(file, headers, at + 1, body, **extra)


def _read_book(p: Path, formulas: bool) -> ReturnedTable:
    """Any workbook python-calamine reads (.xlsx, .ods, .xls); formulas are located only in .xlsx."""
    try:
        book = CalamineWorkbook.from_path(str(p))
        names = book.sheet_names
        name = next((n for n in names if n.strip().lower() == "entry"), None)
        visible = [m.name for m in book.sheets_metadata if str(m.visible).lower().endswith("visible")]
        name = name or (visible[0] if visible else names[0])
        rows = book.get_sheet_by_name(name).to_python(skip_empty_area=False)
        fingerprint = study = None
        if HIDDEN_SHEET in names:
            head = sheet_head(p, HIDDEN_SHEET, 5)
            if head is None:  # not as layout wrote it: calamine reads the whole sheet
                head = book.get_sheet_by_name(HIDDEN_SHEET).to_python(skip_empty_area=False, nrows=5)
            for row in head:
                if len(row) >= 2 and row[0] == "fingerprint":
                    fingerprint = str(row[1])
                if len(row) >= 2 and row[0] == "study":
                    study = str(row[1])
    except UnreadableFile:
        raise
    except Exception as exc:  # calamine raises its own error types for damaged files
        raise _unreadable(p, f"cannot be read as a workbook ({type(exc).__name__}: {exc})") from None
    except BaseException as exc:  # a panic in calamine's Rust code (a date out of range) is no Exception
        if isinstance(exc, (KeyboardInterrupt, SystemExit, GeneratorExit)):
            raise
        raise _unreadable(p, f"cannot be read as a workbook: a cell holds a value out of any range ({exc})") from None
    table = _table(
        str(p),
        rows if isinstance(rows, list) else [list(r) for r in rows],
        fingerprint=fingerprint,
        study=study,
        sheet=name,
    )  # calamine gives lists already
    if formulas:
        try:
            table.formulas = _formula_cells(p, name)
        except Exception:  # the values were read; only the formula warning is lost
            table.formulas = set()
    return table


_MAIN: Final = "{http://schemas.openxmlformats.org/spreadsheetml/2006/main}"
_RELATION: Final = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}id"


def sheet_head(p: Path, sheet: str, nrows: int) -> list[list[Any]] | None:
    """The cells of a sheet's first rows, read from its XML without parsing the rest of it.

    The hidden plan sheet holds a row per slot but only its first rows are needed. Only what
    layout writes is read this way (text inline, numbers); for anything else, shared strings of
    a re-saved file among them, None is returned and calamine reads the sheet whole.
    """
    from defusedxml.ElementTree import fromstring, iterparse

    try:
        with zipfile.ZipFile(p) as z:
            book = fromstring(z.read("xl/workbook.xml"))
            rid = next((s.get(_RELATION) for s in book.iter(f"{_MAIN}sheet") if s.get("name") == sheet), None)
            rels = fromstring(z.read("xl/_rels/workbook.xml.rels"))
            target = next((r.get("Target") for r in rels if r.get("Id") == rid), None)
            if not rid or not target:
                return None
            part = target.lstrip("/") if target.startswith("/") else f"xl/{target}"
            rows: list[list[Any]] = []
            with z.open(part) as fh:
                for _, el in iterparse(fh, events=("end",)):
                    if el.tag != f"{_MAIN}row":
                        continue
                    if int(el.get("r", "0")) != len(rows) + 1:
                        return None
                    cells = list(el.iter(f"{_MAIN}c"))
                    refs = _refs(len(rows) + 1)[: len(cells)]
                    if len(cells) > 26 or any(c.get("r", ref) != ref for c, ref in zip(cells, refs, strict=True)):
                        return None  # a gap between cells, or more than columns A-Z
                    row = [_inline_cell(c) for c in cells]
                    if any(c is _NOT_SIMPLE for c in row):
                        return None
                    rows.append(row)
                    if len(rows) == nrows:
                        break
            return rows
    except Exception:  # whatever is unusual: the whole read below says what is wrong, if anything
        return None


_NOT_SIMPLE: Final = object()


def _refs(row: int) -> list[str]:
    return [f"{chr(65 + i)}{row}" for i in range(26)]


def _inline_cell(c: Any) -> Any:
    kind = c.get("t", "n")
    if kind == "inlineStr":
        return "".join(t.text or "" for t in c.iter(f"{_MAIN}t"))
    v = c.find(f"{_MAIN}v")
    if kind == "str":
        return "" if v is None else v.text or ""
    if kind == "n" and v is not None and v.text:
        return float(v.text)
    return _NOT_SIMPLE  # shared strings, booleans, errors, dates, gaps


def _formula_cells(p: Path, sheet: str) -> set[tuple[int, int]]:
    """(row, column index) of every formula cell of a sheet, by openpyxl in read-only mode."""
    from openpyxl import load_workbook

    found: set[tuple[int, int]] = set()
    wb = load_workbook(p, read_only=True, data_only=False)
    try:
        for row in wb[sheet].iter_rows():
            for cell in row:
                if getattr(cell, "data_type", None) == "f":
                    found.add((cell.row, cell.column - 1))
    finally:
        wb.close()
    return found


def _read_csv(p: Path, limits: Limits = DEFAULT_LIMITS) -> ReturnedTable:
    kind = sniff(p)
    if kind == "empty":
        raise _unreadable(p, "is empty (0 bytes); the file was not saved or not copied completely")
    if kind == "utf16":
        raise _unreadable(p, "is UTF-16 text (Excel's 'Unicode Text'); save it as 'CSV UTF-8' instead")
    if kind in ("zip", "ole"):
        return_as = "a workbook" if kind == "zip" else "an old binary Excel workbook"
        raise _unreadable(p, f"is {return_as}, not a CSV file; give it its own name (.xlsx) or save it as CSV")
    if kind == "binary":
        raise refuse_non_workbook(p, kind)
    raw = p.read_bytes()
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise _unreadable(p, f"is not UTF-8 text (byte {exc.start}); save it as 'CSV UTF-8'") from None
    if "\x00" in text:
        raise _unreadable(p, "holds NUL characters: not a text CSV file")
    if not text.strip():
        raise _unreadable(p, "holds no text (only blank lines)")
    _line_lengths(p, text, limits)
    first = next((line for line in text.splitlines() if line.strip()), "")
    delimiter = max([",", ";", "\t"], key=first.count) if first else ","
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    rows: list[list[Any]] = []
    numbers: list[int] = []
    old_limit = csv.field_size_limit(limits.csv_line + 1)  # our own cell limit below says it more clearly
    try:
        for row in reader:
            if any(len(cell) > limits.csv_field for cell in row):
                raise _unreadable(
                    p,
                    f"line {reader.line_num} holds a cell longer than {limits.csv_field:,} characters; not a table of returns",
                )
            rows.append(row)
            numbers.append(reader.line_num)
    except csv.Error as exc:
        raise _unreadable(p, f"is not valid CSV near line {reader.line_num}: {exc}") from None
    finally:
        csv.field_size_limit(old_limit)
    table = _table(str(p), rows, decimal_comma=delimiter == ";")
    # csv line numbers, not row indexes, so a quoted line break does not shift the row numbers
    offset = table.header_row
    table.rows = [(numbers[offset + i], r) for i, (_, r) in enumerate(table.rows)]
    return table


def _line_lengths(p: Path, text: str, limits: Limits) -> None:
    """Refuse a CSV with a line longer than the limit before the csv module holds it in a field."""
    start = 0
    number = 1
    while start < len(text):
        end = text.find("\n", start)
        end = len(text) if end < 0 else end
        if end - start > limits.csv_line:
            raise _unreadable(p, f"line {number} is longer than {limits.csv_line:,} characters; not a table of returns")
        start = end + 1
        number += 1


_ODS_TABLE = "{urn:oasis:names:tc:opendocument:xmlns:table:1.0}"


def ods_formula_cells(p: Path, sheet: str) -> set[tuple[int, int]]:
    """(row, column index) of every formula cell of an OpenDocument sheet, from content.xml (defusedxml)."""
    from defusedxml.ElementTree import iterparse

    found: set[tuple[int, int]] = set()
    with zipfile.ZipFile(p) as z, z.open("content.xml") as fh:
        in_sheet = False
        row = 0
        for event, el in iterparse(fh, events=("start", "end")):
            tag = el.tag
            if tag == f"{_ODS_TABLE}table":
                if event == "start":
                    in_sheet = el.get(f"{_ODS_TABLE}name") == sheet
                    row = 0
                elif in_sheet:
                    break
            elif in_sheet and tag == f"{_ODS_TABLE}table-row" and event == "end":
                repeat = int(el.get(f"{_ODS_TABLE}number-rows-repeated", "1"))
                col = 0
                for cell in el:
                    if cell.tag not in (f"{_ODS_TABLE}table-cell", f"{_ODS_TABLE}covered-table-cell"):
                        continue
                    span = int(cell.get(f"{_ODS_TABLE}number-columns-repeated", "1"))
                    if cell.get(f"{_ODS_TABLE}formula") is not None:
                        found |= {
                            (row + 1 + r, col + c) for r in range(min(repeat, 1000)) for c in range(min(span, 1000))
                        }
                    col += span
                row += repeat
                el.clear()
    return found
