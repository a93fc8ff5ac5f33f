"""Returns as people really make them: partial copies by round or block, a workbook plus a CSV, split workbooks.

Values are published data (tests/published.py): cortisol per animal (Doncaster & Davey 2007)
in round one, NIST's silver atomic weights (AtmWtAg) in round two.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pandas as pd
import pytest

from layout import Plan, SheetOptions, loads_spec, make_plan, write_sheets
from layout.intake.check import CheckResult, check_returns
from layout.intake.findings import Kind, Severity
from layout.names import ADDED_PREFIX
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from tests.published import TWO_ROUND_DESIGN, two_round_values

SPEC = f"""
[study]
id = "MG2"
title = "Merging partial copies"
seed = 9
[design]
{TWO_ROUND_DESIGN}
unit_name = "pen"
subsample_name = "animal"
[[response]]
name = "y"
kind = "number"
[[response]]
name = "tag"
kind = "text"
required = false
[collection]
rounds = ["first", "second"]
"""

MERGE_KINDS = {Kind.DUPLICATE_SLOT, Kind.CONFLICTING_SLOT, Kind.MISSING_VALUE, Kind.MISSING_SLOT, Kind.MISSING_UNIT}


@pytest.fixture(scope="module")
def plan() -> Plan:
    return make_plan(loads_spec(SPEC, "merge.toml"))


@pytest.fixture(scope="module")
def values(plan: Plan) -> dict[tuple[str, str], float]:
    return two_round_values(plan)


def _copy(plan: Plan, folder: Path, name: str, values: dict[tuple[str, str], float], keep: object) -> Path:
    """A full copy of entry.xlsx in which only the rows keep(code, round) says are filled in."""
    blank = folder / f"{name}-blank.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    chosen = {k: Filled({"y": v}, None) for k, v in values.items() if keep(*k)}  # type: ignore[operator]
    return fill_workbook(plan, blank, folder / f"{name}.xlsx", chosen)


def _clean(result: CheckResult) -> None:
    errors = [f for f in result.findings if f.severity is Severity.ERROR]
    merging = [f for f in result.findings if f.kind in MERGE_KINDS]
    assert errors == [] and merging == []


def _every_value_once(result: CheckResult, values: dict[tuple[str, str], float]) -> None:
    tidy = result.tidy.set_index(["code", "round"])
    assert len(tidy) == len(values)
    for key, v in values.items():
        assert tidy.loc[key, "y"] == v, key
        assert tidy.loc[key, "status"] == "ok", key


class TestPartialCopies:
    def test_two_copies_filled_by_round(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """Two people each fill their own copy for one round; the other round's rows stay blank."""
        a = _copy(plan, tmp_path, "anna", values, lambda c, r: r == "first")
        b = _copy(plan, tmp_path, "ben", values, lambda c, r: r == "second")
        result = check_returns(plan, [a, b])
        _clean(result)
        _every_value_once(result, values)
        tidy = result.tidy.set_index(["code", "round"])
        assert set(tidy.xs("first", level="round")["source_file"]) == {str(a)}
        assert set(tidy.xs("second", level="round")["source_file"]) == {str(b)}

    def test_workbook_plus_csv_for_one_round(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """Round one in the workbook, round two typed from paper into a CSV of codes only."""
        a = _copy(plan, tmp_path, "book", values, lambda c, r: r == "first")
        typed = tmp_path / "second.csv"
        with typed.open("w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["code", "round", "y"])
            w.writerows([c, r, repr(v)] for (c, r), v in values.items() if r == "second")
        result = check_returns(plan, [a, typed])
        _clean(result)
        _every_value_once(result, values)

    def test_three_collectors_by_block(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """Three people fill different blocks in their own full copies."""
        block = {u.code: u.block for u in plan.units}
        unit = {s.code: s.unit for s in plan.slots}
        groups = [{1, 2}, {3}, {4}]
        paths = [
            _copy(plan, tmp_path, f"c{i}", values, lambda c, r, g=g: block[unit[c]] in g) for i, g in enumerate(groups)
        ]
        result = check_returns(plan, paths)
        _clean(result)
        _every_value_once(result, values)

    def test_split_round_workbooks(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """`layout sheets --split round` copies, each filled and returned, check clean together."""
        written = write_sheets(plan, tmp_path, SheetOptions(only=("entry",), split="round"))
        assert [p.name for p in written] == ["entry-first.xlsx", "entry-second.xlsx"]
        filled = []
        for path in written:
            rnd = path.stem.removeprefix("entry-")
            chosen = {k: Filled({"y": v}, None) for k, v in values.items() if k[1] == rnd}
            filled.append(fill_workbook(plan, path, tmp_path / f"filled-{rnd}.xlsx", chosen))
        result = check_returns(plan, filled)
        _clean(result)
        _every_value_once(result, values)


class TestCellByCell:
    def test_file_lacking_a_column_says_nothing_about_it(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """A workbook with tags and a CSV without the tag column: no conflict, the tags kept."""
        blank = tmp_path / "blank.xlsx"
        blank.write_bytes(workbook_bytes(plan))
        book = fill_workbook(
            plan,
            blank,
            tmp_path / "book.xlsx",
            {k: Filled({"y": v, "tag": "ear tag read"}, None) for k, v in values.items()},
        )
        typed = tmp_path / "typed.csv"
        with typed.open("w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["code", "round", "y"])
            w.writerows([c, r, repr(v)] for (c, r), v in values.items())
        result = check_returns(plan, [book, typed])
        assert not [f for f in result.findings if f.kind is Kind.CONFLICTING_SLOT]
        assert set(result.tidy["tag"]) == {"ear tag read"}

    def test_duplicates_keep_notes_and_added_cells(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """A second row with the same value is a duplicate; its note and added cell still reach tidy.csv."""
        book = _copy(plan, tmp_path, "book", values, lambda c, r: True)
        (code, rnd), v = next(iter(values.items()))
        typed = tmp_path / "again.csv"
        typed.write_text(f"code,round,y,note,scale\n{code},{rnd},{v!r},re-weighed,B2\n", encoding="utf-8")
        result = check_returns(plan, [book, typed])
        assert [f.kind for f in result.findings if f.code == code and f.kind in MERGE_KINDS] == [Kind.DUPLICATE_SLOT]
        row = result.tidy.set_index(["code", "round"]).loc[(code, rnd)]
        assert row["note"] == "re-weighed" and row[ADDED_PREFIX + "scale"] == "B2" and row["y"] == v

    def test_a_conflict_is_a_cell_filled_twice_differently(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """Different values in two files are one conflicting-slot error; both values stay in the raw column."""
        book = _copy(plan, tmp_path, "book", values, lambda c, r: True)
        (code, rnd), v = next(iter(values.items()))
        typed = tmp_path / "other.csv"
        typed.write_text(f"code,round,y\n{code},{rnd},{v + 1!r}\n", encoding="utf-8")
        result = check_returns(plan, [book, typed])
        conflicts = [f for f in result.findings if f.kind is Kind.CONFLICTING_SLOT]
        assert [f.code for f in conflicts] == [code]
        row = result.tidy.set_index(["code", "round"]).loc[(code, rnd)]
        assert row["status"] == "conflict" and f"{v + 1:g}" in row["raw"]
        assert not pd.isna(row["y"])


class TestSuggestions:
    def test_round_header_and_level_near_misses(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """A round typed 'frist' suggests 'first'; a header 'Y ' or 'tag' in other case is the same column."""
        (code, _), v = next(iter(values.items()))
        typed = tmp_path / "typed.csv"
        typed.write_text(f"Code,Round,Y,TAG\n{code},frist,{v!r},x\n", encoding="utf-8")
        result = check_returns(plan, [typed])
        rounds = [f for f in result.findings if f.column == "round"]
        assert [f.suggestion for f in rounds] == ["first"]
        assert not [f for f in result.findings if f.kind is Kind.EXTRA_COLUMN]

    def test_header_one_edit_away_is_suggested(self, plan: Plan, values: dict, tmp_path: Path) -> None:
        """A header one letter off ('yy') is an added column whose finding suggests the planned one."""
        (code, rnd), v = next(iter(values.items()))
        typed = tmp_path / "typed.csv"
        typed.write_text(f"code,round,y,tagg\n{code},{rnd},{v!r},x\n", encoding="utf-8")
        extra = [f for f in check_returns(plan, [typed]).findings if f.kind is Kind.EXTRA_COLUMN]
        assert [f.suggestion for f in extra] == ["tag"]
