"""layout check: every finding kind injected into a filled return, and the round trip of values."""

from __future__ import annotations

import csv
import hashlib
import shutil
from collections.abc import Callable
from pathlib import Path
from typing import Any

import openpyxl
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from layout import Plan, loads_spec, make_plan
from layout.codes import compact, slot_code
from layout.intake.check import CheckResult, check_returns
from layout.intake.findings import Kind, Severity
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from tests.conftest import libreoffice_convert
from tests.published import nist_values

SPEC = """
[study]
id = "CK1"
title = "Check test"
seed = 11
[design]
type = "rcbd"
blocks = 4
subsamples = 3
unit_name = "plot"
subsample_name = "core"
[[factor]]
name = "rate"
levels = ["0", "50", "100", "150"]
[layout]
rows = 4
cols = 4
[[response]]
name = "moisture"
kind = "number"
unit = "%"
min = 0
max = 60
decimals = 1
[[response]]
name = "count"
kind = "integer"
min = 0
max = 500
required = false
[[response]]
name = "colour"
kind = "category"
levels = ["pale", "green", "dark"]
required = false
[[response]]
name = "sampled"
kind = "date"
required = false
[[response]]
name = "remark"
kind = "text"
required = false
[collection]
rounds = ["r1", "r2"]
"""

Edit = Callable[[Any, dict[str, int]], None]


def published_fill(plan: Plan) -> dict[tuple[str, str], Filled]:
    """Filled-in moisture for every slot and round: NIST StRD SmLs01's responses in file order.

    (Published values, not invented ones: NIST/ITL Statistical Reference Datasets, SmLs01,
    Simon & Lesage 1989; tests/reference/README.md.) The optional responses stay blank.
    """
    values = iter(nist_values("SmLs01"))
    return {(s.code, rnd.name): Filled({"moisture": next(values)}, None) for rnd in plan.rounds for s in plan.slots}


@pytest.fixture(scope="module")
def plan() -> Plan:
    return make_plan(loads_spec(SPEC, "check.toml"))


@pytest.fixture(scope="module")
def filled(plan: Plan, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A filled-in entry.xlsx with published values."""
    folder = tmp_path_factory.mktemp("filled")
    blank = folder / "entry.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    return fill_workbook(plan, blank, folder / "filled.xlsx", published_fill(plan))


def edited(filled: Path, target: Path, edit: Edit) -> Path:
    """A copy of the filled workbook changed by edit(sheet, column index by header)."""
    wb = openpyxl.load_workbook(filled)
    ws = wb["entry"]
    ws.protection.sheet = False
    col = {c.value: c.column for c in ws[1]}
    edit(ws, col)
    wb.save(target)
    return target


def row_of(ws: Any, col: dict[str, int], code: str, rnd: str = "r1") -> int:
    for r in range(2, ws.max_row + 1):
        if ws.cell(r, col["code"]).value == code and ws.cell(r, col["round"]).value == rnd:
            return r
    raise KeyError(code)


def errors(result: CheckResult) -> set[tuple[str, str | None]]:
    return {(f.kind.value, f.code) for f in result.findings if f.severity is Severity.ERROR}


def kinds(result: CheckResult) -> set[tuple[str, str | None]]:
    return {(f.kind.value, f.code) for f in result.findings}


def a_complete_slot(plan: Plan, filled_values: dict, index: int = 0) -> str:
    """A slot with every value entered in round r1 (not declared missing)."""
    good = [s.code for s in plan.slots if not filled_values[(s.code, "r1")].reason]
    return good[index]


class TestClean:
    def test_clean_return_has_no_errors(self, plan: Plan, filled: Path) -> None:
        """The filled workbook as returned checks with no error and every slot-round found."""
        result = check_returns(plan, [filled])
        assert errors(result) == set()
        assert result.summary["slots_found"] == result.summary["slots_expected"] == len(plan.slots) * 2
        declared = [f for f in result.findings if f.kind is Kind.DECLARED_MISSING]
        assert len(declared) == sum(1 for f in published_fill(plan).values() if f.reason)

    def test_round_trip_gives_the_published_values(self, plan: Plan, filled: Path) -> None:
        """Generate, fill, check: tidy.csv holds exactly the filled-in published values."""
        values = published_fill(plan)
        tidy = check_returns(plan, [filled]).tidy.set_index(["code", "round"])
        for (code, rnd), f in values.items():
            row = tidy.loc[(code, rnd)]
            for r in plan.spec.response:
                got = row[r.name]
                want = f.values.get(r.name)
                assert (pd.isna(got) and want is None) or got == want, (code, rnd, r.name, got, want)
            assert (row["missing_reason"] if not pd.isna(row["missing_reason"]) else None) == f.reason
            assert row["status"] == ("declared-missing" if f.reason else "ok")

    def test_tidy_has_plan_columns(self, plan: Plan, filled: Path) -> None:
        """tidy.csv has one row per slot and round with treatment, levels, status and source."""
        tidy = check_returns(plan, [filled]).tidy
        assert len(tidy) == len(plan.slots) * len(plan.rounds)
        for col in (
            "code",
            "unit",
            "treatment",
            "rate",
            "block",
            "row",
            "col",
            "subsample",
            "round",
            "moisture",
            "missing_reason",
            "status",
            "source_file",
            "source_row",
        ):
            assert col in tidy.columns
        unit_of = {s.code: plan.unit_by_code[s.unit] for s in plan.slots}
        assert all(unit_of[c].treatment == t for c, t in zip(tidy["code"], tidy["treatment"], strict=True))

    def test_files_are_not_changed(self, plan: Plan, filled: Path, tmp_path: Path) -> None:
        """Returned files are byte-for-byte the same after a check."""
        csv_copy = tmp_path / "copy.csv"
        to_csv(filled, csv_copy)
        before = [hashlib.sha256(p.read_bytes()).hexdigest() for p in (filled, csv_copy)]
        check_returns(plan, [filled, csv_copy])
        assert [hashlib.sha256(p.read_bytes()).hexdigest() for p in (filled, csv_copy)] == before


def to_csv(
    xlsx: Path,
    target: Path,
    delimiter: str = ",",
    decimal_comma: bool = False,
    bom: bool = False,
    transform: Callable[[str], str] = lambda c: c,
    sort: bool = False,
) -> Path:
    """The entry sheet as a CSV file, as a spreadsheet program might export it."""
    ws = openpyxl.load_workbook(xlsx)["entry"]
    rows = [[("" if v is None else v) for v in r] for r in ws.iter_rows(values_only=True)]
    head, body = rows[0], rows[1:]
    if sort:
        body.sort(key=lambda r: str(r[0]), reverse=True)
    out = []
    for r in [head, *body]:
        cells = []
        for i, v in enumerate(r):
            text = v.date().isoformat() if hasattr(v, "date") and callable(v.date) else str(v)
            if isinstance(v, float) and decimal_comma:
                text = text.replace(".", ",")
            if i == 0 and r is not head:
                text = transform(text)
            cells.append(text)
        out.append(cells)
    with target.open("w", newline="", encoding="utf-8-sig" if bom else "utf-8") as fh:
        csv.writer(fh, delimiter=delimiter).writerows(out)
    return target


class TestReaders:
    @pytest.mark.parametrize(
        ("delimiter", "decimal_comma", "bom"),
        [(",", False, False), (",", False, True), (";", True, True), (";", True, False), ("\t", False, False)],
        ids=["comma", "comma-bom", "semicolon-decimal-comma-bom", "semicolon-decimal-comma", "tab"],
    )
    def test_csv_dialects_check_clean(
        self, plan: Plan, filled: Path, tmp_path: Path, delimiter: str, decimal_comma: bool, bom: bool
    ) -> None:
        """CSV exports in the usual dialects give the same tidy values as the workbook."""
        path = to_csv(filled, tmp_path / "r.csv", delimiter, decimal_comma, bom)
        got = check_returns(plan, [path])
        assert errors(got) == set()
        want = check_returns(plan, [filled]).tidy
        cols = [r.name for r in plan.spec.response] + ["missing_reason"]
        pd.testing.assert_frame_equal(got.tidy[cols], want[cols])

    def test_sorted_lowercase_codes_without_hyphens(self, plan: Plan, filled: Path, tmp_path: Path) -> None:
        """Rows matched by code, not order: sorted rows and codes typed in lower case without hyphens check clean."""
        path = to_csv(filled, tmp_path / "r.csv", transform=lambda c: c.lower().replace("-", ""), sort=True)
        result = check_returns(plan, [path])
        assert errors(result) == set()
        assert result.summary["slots_found"] == result.summary["slots_expected"]

    def test_title_rows_above_header(self, plan: Plan, filled: Path, tmp_path: Path) -> None:
        """A header pushed down by added title rows is still found."""
        path = edited(filled, tmp_path / "t.xlsx", lambda ws, col: ws.insert_rows(1, 2))
        assert errors(check_returns(plan, [path])) == set()


def _set(code_fn: Callable[[Plan, dict], str], column: str, value: Any) -> Callable[[Plan, dict], Edit]:
    def make(plan: Plan, values: dict) -> Edit:
        code = code_fn(plan, values)

        def edit(ws: Any, col: dict[str, int]) -> None:
            ws.cell(row_of(ws, col, code), col[column]).value = value

        return edit

    return make


def first_good(plan: Plan, values: dict) -> str:
    return a_complete_slot(plan, values, 0)


def _append_copy(transform: Callable[[list[Any]], list[Any]]) -> Callable[[Plan, dict], Edit]:
    def make(plan: Plan, values: dict) -> Edit:
        code = first_good(plan, values)

        def edit(ws: Any, col: dict[str, int]) -> None:
            r = row_of(ws, col, code)
            ws.append(transform([c.value for c in ws[r]]))

        return edit

    return make


def _typo(row: list[Any]) -> list[Any]:
    code = row[0]
    body = compact(code)
    wrong = "9" if body[5] != "9" else "8"
    return [code[:6] + wrong + code[7:], *row[1:]]


def _delete(codes_fn: Callable[[Plan, dict], list[str]]) -> Callable[[Plan, dict], Edit]:
    def make(plan: Plan, values: dict) -> Edit:
        codes = codes_fn(plan, values)

        def edit(ws: Any, col: dict[str, int]) -> None:
            for code in codes:
                ws.delete_rows(row_of(ws, col, code))

        return edit

    return make


def _blank_values(reason: str | None) -> Callable[[Plan, dict], Edit]:
    def make(plan: Plan, values: dict) -> Edit:
        code = first_good(plan, values)

        def edit(ws: Any, col: dict[str, int]) -> None:
            r = row_of(ws, col, code)
            for h in ("moisture (%)", "count", "colour"):
                ws.cell(r, col[h]).value = None
            ws.cell(r, col["missing_reason"]).value = reason

        return edit

    return make


def _other_unit(plan: Plan, values: dict) -> str:
    slot = plan.slots[[s.code for s in plan.slots].index(first_good(plan, values))]
    return next(u.code for u in plan.units if u.code != slot.unit)


def _unit_mismatch(plan: Plan, values: dict) -> Edit:
    code, other = first_good(plan, values), _other_unit(plan, values)

    def edit(ws: Any, col: dict[str, int]) -> None:
        ws.cell(row_of(ws, col, code), col["unit (plot)"]).value = other

    return edit


def _extra_column(plan: Plan, values: dict) -> Edit:
    def edit(ws: Any, col: dict[str, int]) -> None:
        c = ws.max_column + 1
        ws.cell(1, c).value = "weather"
        ws.cell(2, c).value = "sunny"

    return edit


def _drop_column(header: str) -> Callable[[Plan, dict], Edit]:
    def make(plan: Plan, values: dict) -> Edit:
        def edit(ws: Any, col: dict[str, int]) -> None:
            ws.delete_cols(col[header])

        return edit

    return make


def _unit_slots(plan: Plan, values: dict) -> list[str]:
    unit = plan.units[5].code
    return [s.code for s in plan.slots if s.unit == unit]


def _blank_code_row(row: list[Any]) -> list[Any]:
    return [None, *row[1:]]


FOREIGN = slot_code("ZZ9", 999, 3, 1, 1, 0)  # another study's code, of a serial this plan does not have


def _foreign_code(row: list[Any]) -> list[Any]:
    return [FOREIGN, *row[1:]]


def _changed_value(row: list[Any]) -> list[Any]:
    out = list(row)
    out[8] = (out[8] or 0) + 5  # moisture, column I
    return out


def _swap_units(plan: Plan, values: dict) -> Edit:
    """Exchange every value of the lowest- and highest-rate units of block 1."""
    lo = next(u for u in plan.units if u.block == 1 and u.treatment == "0")
    hi = next(u for u in plan.units if u.block == 1 and u.treatment == "150")

    def edit(ws: Any, col: dict[str, int]) -> None:
        for rnd in ("r1", "r2"):
            for sub in range(1, 4):
                a = row_of(ws, col, next(s.code for s in plan.slots if s.unit == lo.code and s.subsample == sub), rnd)
                b = row_of(ws, col, next(s.code for s in plan.slots if s.unit == hi.code and s.subsample == sub), rnd)
                for h in ("moisture (%)", "count", "colour", "missing_reason"):
                    ca, cb = ws.cell(a, col[h]), ws.cell(b, col[h])
                    ca.value, cb.value = cb.value, ca.value

    return edit


def _swap_expect(plan: Plan, values: dict) -> str:
    return next(u for u in plan.units if u.block == 1 and u.treatment in ("0", "150")).code


FAULTS: list[tuple[str, Callable[[Plan, dict], Edit], str, Callable[[Plan, dict], str | None]]] = [
    # (name, edit maker, expected kind, expected code)
    ("blank-code", _append_copy(_blank_code_row), "blank-code", lambda p, v: None),
    ("bad-code", _append_copy(_typo), "bad-code", lambda p, v: _typo([first_good(p, v)])[0]),
    ("unknown-code", _append_copy(_foreign_code), "unknown-code", lambda p, v: FOREIGN),
    ("duplicate-slot", _append_copy(lambda r: r), "duplicate-slot", first_good),
    ("conflicting-slot", _append_copy(_changed_value), "conflicting-slot", first_good),
    ("unit-mismatch", _unit_mismatch, "unit-mismatch", first_good),
    ("not-a-number", _set(first_good, "moisture (%)", "wet"), "not-a-number", first_good),
    ("not-a-whole-number", _set(first_good, "count", 12.5), "not-a-number", first_good),
    ("out-of-range", _set(first_good, "moisture (%)", 75.0), "out-of-range", first_good),
    ("too-many-decimals", _set(first_good, "moisture (%)", 21.37), "too-many-decimals", first_good),
    ("not-a-level", _set(first_good, "colour", "purple"), "not-a-level", first_good),
    ("bad-reason", _set(first_good, "missing_reason", "eaten"), "not-a-level", first_good),
    ("bad-date", _set(first_good, "sampled", "31/31/2026"), "bad-date", first_good),
    ("missing-value", _set(first_good, "moisture (%)", None), "missing-value", first_good),
    ("declared-missing", _blank_values("lost"), "declared-missing", first_good),
    ("reason-with-value", _set(first_good, "missing_reason", "damaged"), "reason-with-value", first_good),
    ("missing-slot", _delete(lambda p, v: [first_good(p, v)]), "missing-slot", first_good),
    ("missing-unit", _delete(_unit_slots), "missing-unit", lambda p, v: p.units[5].code),
    ("extra-column", _extra_column, "extra-column", lambda p, v: None),
    ("missing-column", _drop_column("moisture (%)"), "missing-column", lambda p, v: None),
    ("outlier-subsample", _set(first_good, "moisture (%)", 59.9), "outlier-subsample", first_good),
]
EXPECTED_ERRORS = {
    "blank-code",
    "bad-code",
    "unknown-code",
    "conflicting-slot",
    "unit-mismatch",
    "not-a-number",
    "out-of-range",
    "not-a-level",
    "bad-date",
    "missing-value",
    "missing-slot",
    "missing-unit",
    "missing-column",
}


class TestEveryFinding:
    def test_every_kind_is_injected(self) -> None:
        """Every finding kind of the contract has a fault below or its own test in this file."""
        own_tests = {
            "unreadable-file",
            "wrong-plan",
            "formula-cell",
            "possible-swap",
            "bad-fix",
        }  # swap: test_robust; bad-fix: test_fixes
        assert {k.value for k in Kind} == {kind for _, _, kind, _ in FAULTS} | own_tests

    @pytest.mark.parametrize(("name", "make", "kind", "expect_code"), FAULTS, ids=[f[0] for f in FAULTS])
    def test_fault_gives_exactly_its_finding(
        self, plan: Plan, filled: Path, tmp_path: Path, name: str, make: Callable, kind: str, expect_code: Callable
    ) -> None:
        """One injected fault: its finding (kind and code) is reported, and no other error."""
        values = published_fill(plan)
        path = edited(filled, tmp_path / f"{name}.xlsx", make(plan, values))
        result = check_returns(plan, [path])
        code = expect_code(plan, values)
        assert (kind, code) in kinds(result), [(f.kind.value, f.code) for f in result.findings]
        expected_errors = {(kind, code)} if kind in EXPECTED_ERRORS else set()
        assert errors(result) == expected_errors

    def test_bad_code_suggests_the_planned_code(self, plan: Plan, filled: Path, tmp_path: Path) -> None:
        """A code with one wrong character is reported with the planned code as suggestion."""
        values = published_fill(plan)
        path = edited(filled, tmp_path / "typo.xlsx", _append_copy(_typo)(plan, values))
        bad = next(f for f in check_returns(plan, [path]).findings if f.kind is Kind.BAD_CODE)
        assert first_good(plan, values) in (bad.suggestion or "").split(" or ")

    def test_unreadable_file(self, plan: Plan, tmp_path: Path) -> None:
        """A damaged workbook is an unreadable-file error; the other files are still checked."""
        broken = tmp_path / "broken.xlsx"
        broken.write_bytes(b"PK\x03\x04 not really a workbook")
        result = check_returns(plan, [broken])
        assert ("unreadable-file", None) in errors(result)
        assert {k for k, _ in errors(result)} == {"unreadable-file", "missing-unit"}

    def test_wrong_plan(self, plan: Plan, filled: Path, tmp_path: Path) -> None:
        """A workbook made from another plan is a wrong-plan error and its rows are not used."""
        other = make_plan(loads_spec(SPEC, "check.toml"), seed=12)
        blank = tmp_path / "other.xlsx"
        blank.write_bytes(workbook_bytes(other))
        path = fill_workbook(other, blank, tmp_path / "other-filled.xlsx", published_fill(other))
        result = check_returns(plan, [filled, path])
        assert ("wrong-plan", None) in errors(result)
        assert errors(result) == {("wrong-plan", None)}

    def test_formula_cell(self, plan: Plan, filled: Path, soffice: str, tmp_path: Path) -> None:
        """A formula where a value belongs is a formula-cell warning; its computed value is used.

        LibreOffice Calc recomputes and stores the formula's value, as any spreadsheet program does on save.
        """
        values = published_fill(plan)
        code = first_good(plan, values)
        path = edited(filled, tmp_path / "f.xlsx", _set(lambda p, v: code, "moisture (%)", "=10+2.5")(plan, values))
        resaved = libreoffice_convert(soffice, path, "xlsx", tmp_path / "lo")
        result = check_returns(plan, [resaved])
        assert ("formula-cell", code) in kinds(result)
        assert errors(result) == set()
        tidy = result.tidy.set_index(["code", "round"])
        assert tidy.loc[(code, "r1"), "moisture"] == 12.5

    def test_formula_cell_in_ods_and_xls(self, plan: Plan, filled: Path, soffice: str, tmp_path: Path) -> None:
        """.ods keeps formulas where layout finds them; .xls (where they cannot be found) is refused with what to do."""
        values = published_fill(plan)
        code = first_good(plan, values)
        path = edited(filled, tmp_path / "f.xlsx", _set(lambda p, v: code, "moisture (%)", "=10+2.5")(plan, values))
        ods = libreoffice_convert(soffice, path, "ods", tmp_path / "ods")
        result = check_returns(plan, [ods])
        assert ("formula-cell", code) in kinds(result) and errors(result) == set()
        xls = libreoffice_convert(soffice, path, "xls", tmp_path / "xls")
        result = check_returns(plan, [xls])
        refused = [f for f in result.findings if f.kind is Kind.UNREADABLE_FILE]
        assert len(refused) == 1 and "save as .xlsx" in refused[0].message


class TestSeveralFiles:
    def test_conflict_across_files_names_both(self, plan: Plan, filled: Path, tmp_path: Path) -> None:
        """The same slot with different values in an xlsx and a csv is one conflict naming both files and rows."""
        values = published_fill(plan)
        code = first_good(plan, values)
        other = to_csv(
            edited(filled, tmp_path / "b.xlsx", _set(lambda p, v: code, "moisture (%)", 33.3)(plan, values)),
            tmp_path / "b.csv",
        )
        result = check_returns(plan, [filled, other])
        conflicts = [f for f in result.findings if f.kind is Kind.CONFLICTING_SLOT]
        assert [f.code for f in conflicts] == [code]
        assert str(filled) in conflicts[0].message and conflicts[0].file == str(other)
        duplicates = [f for f in result.findings if f.kind is Kind.DUPLICATE_SLOT]
        assert len(duplicates) == len(plan.slots) * 2 - 1
        assert errors(result) == {("conflicting-slot", code)}


class TestLibreOffice:
    def test_resaved_and_exported_check_clean(self, plan: Plan, filled: Path, soffice: str, tmp_path: Path) -> None:
        """A filled workbook re-saved by LibreOffice Calc (xlsx, ods) and exported by it (csv) all check clean."""
        out = tmp_path / "lo"
        for fmt in ("xlsx", "csv", "ods"):
            libreoffice_convert(soffice, filled, fmt, out)
        want = check_returns(plan, [filled]).tidy
        cols = [r.name for r in plan.spec.response] + ["missing_reason"]
        for name in ("filled.xlsx", "filled.csv", "filled.ods"):
            result = check_returns(plan, [out / name])
            assert errors(result) == set(), name
            pd.testing.assert_frame_equal(result.tidy[cols], want[cols], obj=name)
        shutil.rmtree(out)


class TestNothingLost:
    def test_cells_beyond_the_header_become_added_columns(self, plan: Plan, filled: Path, tmp_path: Path) -> None:
        """A value typed to the right of the last headed column is carried into tidy.csv, with a warning."""
        values = published_fill(plan)
        code = first_good(plan, values)

        def edit(ws: Any, col: dict[str, int]) -> None:
            ws.cell(row_of(ws, col, code), ws.max_column + 2).value = "pot cracked"

        result = check_returns(plan, [edited(filled, tmp_path / "wide.xlsx", edit)])
        assert errors(result) == set()
        assert any(f.kind is Kind.EXTRA_COLUMN for f in result.findings)
        tidy = result.tidy.set_index(["code", "round"])
        extra = [c for c in tidy.columns if c.startswith("added: column ")]
        assert [tidy.loc[(code, "r1"), c] for c in extra] == ["pot cracked"]

    def test_unplaced_rows_keep_their_cells(self, plan: Plan, filled: Path, tmp_path: Path) -> None:
        """A row whose code matches nothing stays in tidy.csv as unmatched, with every cell it had."""
        path = edited(filled, tmp_path / "x.xlsx", _append_copy(_typo)(plan, published_fill(plan)))
        tidy = check_returns(plan, [path]).tidy
        unmatched = tidy[tidy["status"] == "unmatched"]
        assert len(unmatched) == 1 and "moisture (%)=" in unmatched["note"].iloc[0]


class TestNoTracebacks:
    @settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
    @given(cells=st.lists(st.lists(st.text(max_size=12), max_size=9), max_size=8), use_header=st.booleans())
    def test_any_csv_gives_findings_not_exceptions(
        self, plan: Plan, tmp_path: Path, cells: list[list[str]], use_header: bool
    ) -> None:
        """Whatever a CSV holds, check_returns reports findings and never raises."""
        header = ["code", "round", "moisture (%)", "count", "colour", "missing_reason"] if use_header else []
        path = tmp_path / "any.csv"
        with path.open("w", newline="", encoding="utf-8") as fh:
            csv.writer(fh).writerows([header, *cells] if header else cells)
        result = check_returns(plan, [path])
        assert result.findings  # at least the missing slots
        assert len(result.tidy) >= len(plan.slots) * len(plan.rounds)
