"""entry.xlsx read back by outside readers: python-calamine, openpyxl and LibreOffice Calc."""

from __future__ import annotations

import csv
import time
from pathlib import Path

import openpyxl
import pytest
from python_calamine import CalamineWorkbook

from layout import Plan
from layout.outputs.entry_table import entry_rows, headers
from layout.outputs.workbook import HIDDEN_SHEET, workbook_bytes
from tests.conftest import libreoffice_convert


@pytest.fixture()
def entry(tmp_path: Path, rcbd_plan: Plan) -> Path:
    path = tmp_path / "entry.xlsx"
    path.write_bytes(workbook_bytes(rcbd_plan))
    return path


class TestReadBack:
    def test_calamine_gives_planned_rows(self, entry: Path, rcbd_plan: Plan) -> None:
        """python-calamine reads exactly one row per slot and round, in collection order, with the planned codes."""
        rows = CalamineWorkbook.from_path(str(entry)).get_sheet_by_name("entry").to_python()
        assert rows[0] == headers(rcbd_plan)
        planned = entry_rows(rcbd_plan)
        assert len(rows) - 1 == len(planned) == len(rcbd_plan.slots) * 2
        assert [(r[0], r[1], r[6]) for r in rows[1:]] == [(p.code, p.unit.code, p.round) for p in planned]
        slot_unit = {s.code: s.unit for s in rcbd_plan.slots}
        assert all(slot_unit[r[0]] == r[1] for r in rows[1:])

    def test_header_names(self, rcbd_plan: Plan) -> None:
        """The header follows the contract: structure (with the study's nouns), treatment when not blind, responses
        with units, reason, note."""
        assert headers(rcbd_plan) == [
            "code",
            "unit (plot)",
            "block",
            "row",
            "col",
            "subsample (core)",
            "round",
            "treatment",
            "moisture (%)",
            "nitrate (mg/kg)",
            "sampled_on",
            "missing_reason",
            "note",
        ]

    def test_units_and_about_sheets(self, entry: Path, rcbd_plan: Plan) -> None:
        """The units sheet lists every unit; the about sheet gives seed and fingerprint."""
        book = CalamineWorkbook.from_path(str(entry))
        units = book.get_sheet_by_name("units").to_python()
        assert [r[0] for r in units[1:]] == [u.code for u in rcbd_plan.units]
        about = {r[0]: r[1] for r in book.get_sheet_by_name("about").to_python() if r and r[0]}
        assert about["plan fingerprint"] == rcbd_plan.fingerprint
        assert int(about["seed"]) == rcbd_plan.seed

    def test_same_bytes_every_time(self, rcbd_plan: Plan) -> None:
        """The same plan gives the same workbook, byte for byte."""
        first = workbook_bytes(rcbd_plan)
        time.sleep(1.1)  # openpyxl stamps the save time to the second
        assert workbook_bytes(rcbd_plan) == first


class TestProtectionAndValidation:
    def test_validation_ranges_match_spec(self, entry: Path, rcbd_plan: Plan) -> None:
        """Each response column's data validation (read by openpyxl) has the spec's type and range."""
        ws = openpyxl.load_workbook(entry)["entry"]
        head = [c.value for c in ws[1]]
        by_col = {str(dv.sqref).split(":")[0].rstrip("0123456789"): dv for dv in ws.data_validations.dataValidation}
        last = len(entry_rows(rcbd_plan)) + 1
        for r in rcbd_plan.spec.response:
            col = openpyxl.utils.get_column_letter(head.index(r.header) + 1)
            dv = by_col[col]
            assert str(dv.sqref) == f"{col}2:{col}{last}"
            if r.kind == "number":
                assert (dv.type, float(dv.formula1), float(dv.formula2)) == ("decimal", r.min, r.max)
            elif r.kind == "date":
                assert dv.type == "date"
            assert r.name in dv.promptTitle and dv.showInputMessage
            assert r.header in dv.prompt  # the name with its unit
            if r.min is not None and r.max is not None:
                assert f"{r.min:g} to {r.max:g}" in dv.prompt
        reason_col = openpyxl.utils.get_column_letter(head.index("missing_reason") + 1)
        assert by_col[reason_col].type == "list"
        lists = openpyxl.load_workbook(entry)["lists"]
        sheet, cells = by_col[reason_col].formula1.split("!")
        assert sheet == "lists" and lists.sheet_state == "hidden"
        listed = [c.value for row in lists[cells.replace("$", "")] for c in row]
        assert listed == list(rcbd_plan.spec.collection.missing_reasons)

    def test_category_list_and_whole_numbers(self, tmp_path: Path, crd_plan: Plan) -> None:
        """Categories get a list validation; integer responses a whole-number one."""
        path = tmp_path / "e.xlsx"
        path.write_bytes(workbook_bytes(crd_plan))
        ws = openpyxl.load_workbook(path)["entry"]
        book = openpyxl.load_workbook(path)
        listed = sorted(
            tuple(c.value for row in book["lists"][dv.formula1.split("!")[1].replace("$", "")] for c in row)
            for dv in ws.data_validations.dataValidation
            if dv.type == "list"
        )
        assert listed == sorted([("not measured", "lost", "damaged", "other"), ("healthy", "wilted", "chewed")])
        kinds = {dv.type for dv in ws.data_validations.dataValidation}
        assert "whole" in kinds  # leaves (integer) and height (decimals = 0)
        head = [c.value for c in ws[1]]
        assert "block" not in head and "row" in head  # a crd has no blocks; its bench grid has rows

    def test_locked_structure_open_inputs(self, entry: Path, rcbd_plan: Plan) -> None:
        """Structure cells are locked, input cells unlocked, the sheet protected without a password."""
        ws = openpyxl.load_workbook(entry)["entry"]
        assert ws.protection.sheet and not ws.protection.password
        n_struct = 8
        row = list(ws[2])
        assert all(c.protection.locked for c in row[:n_struct])
        assert not any(c.protection.locked for c in row[n_struct:])
        assert ws.freeze_panes == "B2" and ws.print_title_rows == "$1:$1"
        assert ws.page_setup.orientation == "landscape" and ws.sheet_properties.pageSetUpPr.fitToPage

    def test_very_hidden_sheet(self, entry: Path, rcbd_plan: Plan) -> None:
        """A very hidden sheet holds the fingerprint and the slot list."""
        wb = openpyxl.load_workbook(entry)
        ws = wb[HIDDEN_SHEET]
        assert ws.sheet_state == "veryHidden"
        rows = list(ws.values)
        assert rows[1][:2] == ("fingerprint", rcbd_plan.fingerprint)
        assert [r[0] for r in rows[4:]] == [s.code for s in rcbd_plan.slots]


class TestLibreOffice:
    def test_calc_opens_and_exports_same_rows(self, entry: Path, rcbd_plan: Plan, soffice: str, tmp_path: Path) -> None:
        """LibreOffice Calc (headless --convert-to csv) opens entry.xlsx and exports the planned rows."""
        exported = libreoffice_convert(soffice, entry, "csv", tmp_path / "lo")
        with exported.open(newline="", encoding="utf-8") as fh:
            rows = list(csv.reader(fh))
        assert rows[0] == headers(rcbd_plan)
        assert [r[0] for r in rows[1:]] == [p.code for p in entry_rows(rcbd_plan)]


class TestListsAfterLibreOffice:
    def test_odd_and_long_level_lists_survive_a_resave(self, tmp_path: Path, soffice: str) -> None:
        """Levels with commas and quotes, and a list longer than a literal list may be, stay offered after
        LibreOffice Calc re-saves the workbook, and a filled copy checks clean."""
        from layout import make_plan
        from layout.intake.check import check_returns
        from tests.conftest import libreoffice_convert

        levels = ["split, then dried", 'called "soft"'] + [f"grade {i:02d} of the long scale" for i in range(1, 40)]
        from layout.spec import parse_spec

        spec = parse_spec(
            {
                "study": {"id": "LV1", "title": "levels", "seed": 2},
                "design": {"type": "crd", "replicates": 2, "treatments": ["a", "b"]},
                "response": [{"name": "texture", "kind": "category", "levels": levels}],
            }
        )
        plan = make_plan(spec)
        path = tmp_path / "entry.xlsx"
        path.write_bytes(workbook_bytes(plan))
        assert len(",".join(levels)) > 255
        resaved = libreoffice_convert(soffice, path, "xlsx", tmp_path / "lo")
        book = openpyxl.load_workbook(resaved)
        dv = next(
            d for d in book["entry"].data_validations.dataValidation if d.type == "list" and "lists" in d.formula1
        )
        sheet, cells = dv.formula1.replace("'", "").split("!")
        got = [c.value for row in book[sheet][cells.replace("$", "")] for c in row]
        assert got[: len(levels)] == levels or got == levels
        ws = book["entry"]
        head = [c.value for c in ws[1]]
        for r in range(2, ws.max_row + 1):
            ws.cell(r, head.index("texture") + 1).value = levels[0]
        ws.protection.sheet = False
        book.save(tmp_path / "filled.xlsx")
        result = check_returns(plan, [tmp_path / "filled.xlsx"])
        assert [f for f in result.findings if f.severity.value == "error"] == []


def test_text_that_looks_like_a_formula_stays_text(tmp_path: Path) -> None:
    """Names starting with = + - @ (a spec may hold them) are written as text cells, never as formulas
    (OWASP, "CSV Injection": the same characters start a formula in a spreadsheet)."""
    from layout import loads_spec, make_plan

    spec = loads_spec(
        '[study]\nid = "FM1"\ntitle = "=HYPERLINK(1)"\nseed = 2\n[design]\ntype = "crd"\nreplicates = 2\n'
        'treatments = ["=1+1", "+2", "-3", "@SUM(A1)"]\nunit_name = "=pot"\n'
        '[[response]]\nname = "="\nkind = "category"\nlevels = ["=a", "+b"]\nunit = "0"\n',
        "fm.toml",
    )
    path = tmp_path / "entry.xlsx"
    path.write_bytes(workbook_bytes(make_plan(spec)))
    wb = openpyxl.load_workbook(path)  # openpyxl reads a stored formula back as data_type "f"
    formulas = [
        (ws.title, c.coordinate) for ws in wb.worksheets for row in ws.iter_rows() for c in row if c.data_type == "f"
    ]
    assert formulas == []
    texts = {c.value for ws in wb.worksheets for row in ws.iter_rows() for c in row}
    assert {"=1+1", "+2", "-3", "@SUM(A1)", "=a", "+b"} <= texts


def test_bulk_rows_as_text_equal_openpyxl_byte_for_byte(
    rcbd_plan: Plan, blind_plan: Plan, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The rows written as text (layout.outputs.sheetxml) make the very bytes openpyxl makes when it
    writes every row itself, for whole workbooks and split ones."""
    from layout.outputs import workbook
    from layout.outputs.entry_table import parts

    def every(plan: Plan) -> list[bytes]:
        return [workbook_bytes(plan), *(workbook_bytes(plan, p) for p in parts(plan, "round"))]

    fast = [every(rcbd_plan), every(blind_plan)]
    monkeypatch.setattr(workbook, "writable", lambda rows: False)  # openpyxl writes every row
    assert [every(rcbd_plan), every(blind_plan)] == fast
