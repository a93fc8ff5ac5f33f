"""entry.xlsx: the data-entry workbook, written in openpyxl's write-only mode.

Structure columns are locked and shaded, input cells unlocked; every response column has
a data validation with an input message. A very hidden sheet carries the plan's
fingerprint and the slot list (never the treatment key when the study is blind), so a
returned workbook can prove which plan it belongs to.
"""

from __future__ import annotations

import html
import io
import re
import zipfile
from copy import copy
from datetime import datetime
from typing import Final

from openpyxl import Workbook
from openpyxl.cell import WriteOnlyCell
from openpyxl.cell.cell import Cell
from openpyxl.styles import Alignment, Border, Font, PatternFill, Protection, Side
from openpyxl.utils import get_column_letter
from openpyxl.worksheet._write_only import WriteOnlyWorksheet
from openpyxl.worksheet.datavalidation import DataValidation

from layout.meta import ENTRY_FORMAT, HIDDEN_SHEET, __version__
from layout.outputs.entry_table import (
    TRAILING,
    Part,
    allowed_text,
    entry_rows,
    headers,
    structure_columns,
    structure_values,
)
from layout.outputs.sheetxml import with_rows, writable
from layout.plan import Plan
from layout.spec import Response

_FIXED_TIME: Final = datetime(2000, 1, 1)  # fixed so the same plan gives the same bytes
_SHADE: Final = PatternFill("solid", fgColor="E8ECEF")
_BOLD: Final = Font(bold=True)
_OPEN: Final = Protection(locked=False)
_THIN: Final = Side(style="thin", color="9AA3AB")
_BOX: Final = Border(left=_THIN, right=_THIN, top=_THIN, bottom=_THIN)
LISTS_SHEET: Final = "lists"
Pending = dict[str, tuple[int, list[list[object]]]]  # sheet title → (row openpyxl wrote last, rows to add)
_WIDTHS: Final = {"code": 15, "unit": 13, "block": 7, "row": 6, "col": 6, "subsample": 11, "round": 10, "treatment": 16}


def _text_safe(ws: WriteOnlyWorksheet, value: object) -> WriteOnlyCell:
    """A cell whose text stays text: openpyxl would store a string starting with '=' as a formula."""
    c = WriteOnlyCell(ws, value=value)
    if isinstance(value, str):
        c.data_type = "s"
    return c


def _row(ws: WriteOnlyWorksheet, values: list[object]) -> list[WriteOnlyCell]:
    return [v if isinstance(v, Cell) else _text_safe(ws, v) for v in values]


def _styled(ws: WriteOnlyWorksheet, *, locked: bool, bold: bool) -> WriteOnlyCell:
    c = WriteOnlyCell(ws)
    c.border = _BOX
    if locked:
        c.fill = _SHADE
    else:
        c.protection = _OPEN
    if bold:
        c.font = _BOLD
    return c


def _cell(ws: WriteOnlyWorksheet, value: object, *, locked: bool = True, bold: bool = False) -> WriteOnlyCell:
    """A boxed cell, shaded and locked or white and open. Its style is copied from a template cell made
    once per sheet and kind: setting border, fill and protection one by one costs ten times as much."""
    templates = ws.__dict__.setdefault("_layout_templates", {})  # kept on the sheet: styles index its workbook
    template = templates.get((locked, bold))
    if template is None:
        template = templates[(locked, bold)] = _styled(ws, locked=locked, bold=bold)
    c = _text_safe(ws, value)
    c._style = copy(template._style)
    return c


def _validation(r: Response, cells: str, lists: dict[str, str]) -> DataValidation:
    """Excel data validation for one response column."""
    title = r.name[:32]
    prompt = f"{r.header}: {allowed_text(r)}. Leave blank and pick a missing_reason if it could not be measured."[:255]
    kw = dict(
        allow_blank=True,
        showInputMessage=True,
        showErrorMessage=True,
        promptTitle=title,
        prompt=prompt,
        errorTitle=title,
        error=f"Allowed: {allowed_text(r)}"[:255],
    )
    if r.kind in ("number", "integer"):
        kind = "whole" if r.kind == "integer" or r.decimals == 0 else "decimal"
        lo, hi = r.min, r.max
        if lo is not None and hi is not None:
            dv = DataValidation(type=kind, operator="between", formula1=f"{lo:g}", formula2=f"{hi:g}", **kw)
        elif lo is not None:
            dv = DataValidation(type=kind, operator="greaterThanOrEqual", formula1=f"{lo:g}", **kw)
        elif hi is not None:
            dv = DataValidation(type=kind, operator="lessThanOrEqual", formula1=f"{hi:g}", **kw)
        else:
            # no range given: any value of the kind (whole numbers are 32-bit in spreadsheet validation)
            lo_any, hi_any = ("-2147483648", "2147483647") if kind == "whole" else ("-1E+307", "1E+307")
            dv = DataValidation(type=kind, operator="between", formula1=lo_any, formula2=hi_any, **kw)
    elif r.kind == "category":
        dv = DataValidation(type="list", formula1=lists[r.name], **kw)
    elif r.kind == "date":
        # 1 is 1900-01-01 in spreadsheet date serials: any real date passes.
        dv = DataValidation(type="date", operator="greaterThanOrEqual", formula1="1", **kw)
    else:
        dv = DataValidation(type="textLength", operator="lessThanOrEqual", formula1="32767", **kw)
    dv.add(cells)
    return dv


def _lists(plan: Plan) -> dict[str, list[str]]:
    """Every list a validation offers: category levels by response name, and the missing reasons."""
    lists = {r.name: list(r.levels or ()) for r in plan.spec.response if r.kind == "category"}
    lists["missing_reason"] = list(plan.spec.collection.missing_reasons)
    return lists


def _list_ranges(lists: dict[str, list[str]]) -> dict[str, str]:
    """name → the range of the hidden lists sheet that holds it.

    A range, not a literal list: levels may hold commas and quotes, and a literal list is
    limited to 255 characters in spreadsheet programs.
    """
    return {
        n: f"{LISTS_SHEET}!${get_column_letter(j + 1)}$1:${get_column_letter(j + 1)}${len(v)}"
        for j, (n, v) in enumerate(lists.items())
    }


def _lists_sheet(wb: Workbook, lists: dict[str, list[str]]) -> None:
    ws = wb.create_sheet(LISTS_SHEET)
    ws.sheet_state = "hidden"
    names = list(lists)
    for i in range(max(len(v) for v in lists.values())):
        ws.append(_row(ws, [lists[n][i] if i < len(lists[n]) else None for n in names]))


def _entry_sheet(wb: Workbook, plan: Plan, part: Part | None, lists: dict[str, str], pending: Pending) -> None:
    ws = wb.create_sheet("entry")
    head = headers(plan)
    rows = entry_rows(plan, part)
    structure = structure_columns(plan)
    n_struct = len(structure)
    last = len(rows) + 1
    widths = [max(_WIDTHS[c], len(h) + 3) for c, h in zip(structure, head, strict=False)]
    widths += [max(12, len(r.header) + 3) for r in plan.spec.response] + [16, 30]
    for i, w in enumerate(widths, start=1):
        ws.column_dimensions[get_column_letter(i)].width = w
    for j, r in enumerate(plan.spec.response):
        col = get_column_letter(n_struct + j + 1)
        ws.data_validations.append(_validation(r, f"{col}2:{col}{last}", lists))
    reasons_col = get_column_letter(n_struct + len(plan.spec.response) + 1)
    reasons = DataValidation(
        type="list",
        formula1=lists["missing_reason"],
        allow_blank=True,
        showInputMessage=True,
        promptTitle="missing_reason",
        prompt="Only when a value is blank: why it could not be measured.",
    )
    reasons.add(f"{reasons_col}2:{reasons_col}{last}")
    ws.data_validations.append(reasons)
    ws.freeze_panes = "B2"
    ws.print_title_rows = "1:1"
    ws.page_setup.orientation = "landscape"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 0
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    ws.protection.sheet = True  # no password: it guards against slips, not people
    ws.protection.formatColumns = False
    ws.protection.sort = False  # allowed: rows are matched by code, so order does not matter
    ws.protection.autoFilter = False
    last_col = get_column_letter(len(head))
    ws.auto_filter.ref = f"A1:{last_col}{last}"
    ws.print_area = f"A1:{last_col}{last}"
    ws.append(_row(ws, [_cell(ws, h, bold=True) for h in head]))
    inputs = len(plan.spec.response) + len(TRAILING)
    values = [structure_values(plan, row) + [None] * inputs for row in rows]
    by_openpyxl = values if not writable(values) else values[:1]  # the rest go in as text (sheetxml)
    for v in by_openpyxl:
        ws.append(
            _row(ws, [_cell(ws, x) for x in v[:n_struct]] + [_cell(ws, None, locked=False) for _ in range(inputs)])
        )
    if len(by_openpyxl) < len(values):
        pending[ws.title] = (2, values[1:])


def _units_sheet(wb: Workbook, plan: Plan) -> None:
    ws = wb.create_sheet("units")
    blind = plan.spec.study.blind
    head = ["unit", "serial", "block", "row", "col", "whole_plot", "subsamples"] + ([] if blind else ["treatment"])
    for i, w in enumerate([12, 8, 7, 6, 6, 11, 11, 16], start=1):
        ws.column_dimensions[get_column_letter(i)].width = w
    ws.freeze_panes = "A2"
    ws.append(_row(ws, [_cell(ws, h, bold=True) for h in head]))
    for u in plan.units:
        values = [u.code, u.serial, u.block, u.row, u.col, u.whole_plot, len(plan.slots_of[u.code])]
        ws.append(_row(ws, values + ([] if blind else [u.treatment])))


def _about_sheet(wb: Workbook, plan: Plan) -> None:
    ws = wb.create_sheet("about")
    ws.column_dimensions["A"].width = 24
    ws.column_dimensions["B"].width = 90
    ws.page_setup.orientation = "landscape"
    ws.page_setup.fitToWidth = 1
    ws.page_setup.fitToHeight = 1
    ws.sheet_properties.pageSetUpPr.fitToPage = True
    spec = plan.spec
    d = spec.design
    wrap = Alignment(wrap_text=True, vertical="top")
    # blind: no seed and no treatment count, from which the grouping of units could be rebuilt
    design = (
        f"{len(plan.units)} {d.units_word}, {len(plan.slots)} {d.subsample_name} slots"
        if spec.study.blind
        else f"{d.type}, {len(spec.treatments)} treatments, {len(plan.units)} {d.units_word}, "
        f"{len(plan.slots)} {d.subsample_name} slots"
    )
    lines: list[tuple[str, object]] = [
        ("study", f"{spec.study.id}: {spec.study.title}"),
        ("design", design),
        ("rounds", ", ".join(r.name for r in plan.rounds)),
    ]
    if not spec.study.blind:
        lines.append(("seed", plan.seed))
    lines += [
        ("plan fingerprint", plan.fingerprint),
        ("made by", f"layout {__version__}"),
        ("", ""),
        (
            "how to fill in",
            "Enter one value per cell in the white columns of the sheet 'entry'. Do not change the "
            "shaded columns, do not delete rows, and keep the code in every row: rows are matched "
            "to the plan by code, so sorting and filtering are safe.",
        ),
        ("when a value is missing", "Leave the value blank and choose a missing_reason. Use note for anything else."),
        ("missing reasons", ", ".join(spec.collection.missing_reasons)),
    ]
    lines += [(f"response: {r.header}", allowed_text(r)) for r in spec.response]
    for key, value in lines:
        k = _text_safe(ws, key)
        k.font = _BOLD
        v = _text_safe(ws, value)
        v.alignment = wrap
        ws.append(_row(ws, [k, v]))


def _hidden_sheet(wb: Workbook, plan: Plan, pending: Pending) -> None:
    ws = wb.create_sheet(HIDDEN_SHEET)
    ws.sheet_state = "veryHidden"
    ws.append(_row(ws, ["format", ENTRY_FORMAT]))
    ws.append(_row(ws, ["fingerprint", plan.fingerprint]))
    ws.append(_row(ws, ["study", plan.spec.study.id]))
    ws.append(_row(ws, ["slot", "unit", "subsample"]))
    values = [[s.code, s.unit, s.subsample] for s in plan.slots]
    by_openpyxl = values if not writable(values) else values[:1]
    for v in by_openpyxl:
        ws.append(_row(ws, v))
    if len(by_openpyxl) < len(values):
        pending[ws.title] = (5, values[1:])


def _sheet_parts(src: zipfile.ZipFile) -> dict[str, str]:
    """Sheet title → its part in the archive, from xl/workbook.xml and its relationships."""
    rels = dict(re.findall(rb'Id="([^"]+)"[^>]*Target="([^"]+)"', src.read("xl/_rels/workbook.xml.rels")))
    rels |= {k: v for v, k in re.findall(rb'Target="([^"]+)"[^>]*Id="([^"]+)"', src.read("xl/_rels/workbook.xml.rels"))}
    out = {}
    for name, rid in re.findall(rb'<sheet name="([^"]+)"[^>]*r:id="([^"]+)"', src.read("xl/workbook.xml")):
        target = rels[rid].decode().lstrip("/")
        out[html.unescape(name.decode())] = target if target.startswith("xl/") else "xl/" + target
    return out


def _stable_zip(data: bytes, pending: Pending | None = None) -> bytes:
    """The same archive with fixed entry times, so the same plan gives the same bytes; the pending
    rows of each sheet written in (layout.outputs.sheetxml)."""
    out = io.BytesIO()
    with zipfile.ZipFile(io.BytesIO(data)) as src, zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        parts = {v: k for k, v in _sheet_parts(src).items()} if pending else {}
        for info in src.infolist():
            fixed = zipfile.ZipInfo(info.filename, date_time=(1980, 1, 1, 0, 0, 0))
            fixed.compress_type = zipfile.ZIP_DEFLATED
            fixed.external_attr = 0o600 << 16
            data = src.read(info.filename)
            title = parts.get(info.filename)
            if pending and title in pending:
                sample_row, rows = pending[title]
                data = with_rows(data, rows, sample_row)
            if info.filename == "docProps/core.xml":  # openpyxl stamps the save time here
                data = re.sub(rb"(<dcterms:modified[^>]*>)[^<]*", rb"\g<1>2000-01-01T00:00:00Z", data)
            dst.writestr(fixed, data)
    return out.getvalue()


def workbook_bytes(plan: Plan, part: Part | None = None) -> bytes:
    """entry.xlsx as bytes: every slot and round, or only one round's or block's rows."""
    wb = Workbook(write_only=True)
    wb.properties.creator = f"layout {__version__}"
    wb.properties.title = plan.spec.study.title
    wb.properties.created = _FIXED_TIME
    wb.properties.modified = _FIXED_TIME
    lists = _lists(plan)
    pending: Pending = {}
    _entry_sheet(wb, plan, part, _list_ranges(lists), pending)
    _units_sheet(wb, plan)
    _about_sheet(wb, plan)
    _lists_sheet(wb, lists)
    _hidden_sheet(wb, plan, pending)
    buf = io.BytesIO()
    wb.save(buf)
    return _stable_zip(buf.getvalue(), pending)
