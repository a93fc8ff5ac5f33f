"""The quick paths (clean rows in layout.intake.fastrows, first rows in merge) give exactly the general check.

Every case is checked twice, once as the command does it and once with every row sent
through the per-row code, and the two results must be equal in full: findings (every field,
in order), tidy table, summary, outliers, swaps and proposed fixes. The cases are the
hidden-row ones of the other check tests (sorted, mistyped, duplicated, conflicting and
foreign rows, every planted fault, every file of tests/returns, the CSV dialects), and
random cells put into otherwise clean rows.
"""

from __future__ import annotations

import datetime as dt
import functools
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import layout.intake.gather as gather_module
import layout.intake.returned as returned_module
from layout import Plan, load_spec, loads_spec, make_plan
from layout.intake import fastrows, merge, rows
from layout.intake.check import CheckResult, check_returns
from layout.intake.columns import map_columns
from layout.intake.fixes import FIX_COLUMNS, read_fixes
from layout.intake.readers import ReturnedTable, read_returned
from layout.intake.rows import PlanIndex, check_rows
from layout.outputs.workbook import workbook_bytes
from layout.simulate import fill_workbook
from tests import test_check as tc

RETURNS = Path(__file__).parent / "returns"


def both(plan: Plan, paths: list[Path], fixes: Path | None = None) -> tuple[CheckResult, CheckResult]:
    """The check as the command makes it, and the same check with the quick paths turned off."""
    quick = check_returns(plan, paths, fixes=read_fixes(fixes) if fixes else None)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(gather_module, "check_rows", functools.partial(rows.check_rows, quick=False))
        mp.setattr(returned_module, "merge_entries", functools.partial(merge.merge_entries, quick=False))
        mp.setattr(gather_module, "take_clean", lambda _table, *_: (None, _table))
        slow = check_returns(plan, paths, fixes=read_fixes(fixes) if fixes else None)
    return quick, slow


def assert_same(quick: CheckResult, slow: CheckResult) -> None:
    assert quick.findings == slow.findings
    pd.testing.assert_frame_equal(quick.tidy, slow.tidy)
    assert quick.summary == slow.summary
    assert (quick.outliers, quick.swaps) == (slow.outliers, slow.swaps)
    assert quick.proposals == slow.proposals


@pytest.fixture(scope="module")
def plan() -> Plan:
    return make_plan(loads_spec(tc.SPEC, "check.toml"))


@pytest.fixture(scope="module")
def filled(plan: Plan, tmp_path_factory: pytest.TempPathFactory) -> Path:
    """test_check's filled workbook: the published values of NIST StRD SmLs01 (see there)."""
    folder = tmp_path_factory.mktemp("filled")
    (folder / "entry.xlsx").write_bytes(workbook_bytes(plan))
    return fill_workbook(plan, folder / "entry.xlsx", folder / "filled.xlsx", tc.published_fill(plan))


def test_the_quick_path_takes_the_clean_rows(plan: Plan, filled: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """On a clean return nearly every row goes a quick way, most of them in columns (else the comparisons
    below prove little): the clean block takes the rows that fill every value, FastRows the clean rest."""
    taken: list[bool] = []
    in_columns: list[int] = []
    original_entry, original_take = fastrows.FastRows.entry, gather_module.take_clean

    def counting(self: fastrows.FastRows, number: int, cells: list[Any]) -> Any:
        entry = original_entry(self, number, cells)
        taken.append(entry is not None)
        return entry

    def counting_take(*args: Any) -> Any:
        block, rest = original_take(*args)
        in_columns.append(len(block) if block else 0)
        return block, rest

    monkeypatch.setattr(fastrows.FastRows, "entry", counting)
    monkeypatch.setattr(gather_module, "take_clean", counting_take)
    check_returns(plan, [filled])
    declared = sum(1 for f in tc.published_fill(plan).values() if f.reason)  # a reason sends a row the slow way
    assert len(taken) + sum(in_columns) == len(plan.slots) * len(plan.rounds)
    assert sum(taken) + sum(in_columns) == len(plan.slots) * len(plan.rounds) - declared
    assert sum(in_columns) > len(plan.slots) * len(plan.rounds) // 2


@pytest.mark.parametrize(("name", "make"), [(f[0], f[1]) for f in tc.FAULTS], ids=[f[0] for f in tc.FAULTS])
def test_every_planted_fault(plan: Plan, filled: Path, tmp_path: Path, name: str, make: Any) -> None:
    path = tc.edited(filled, tmp_path / f"{name}.xlsx", make(plan, tc.published_fill(plan)))
    assert_same(*both(plan, [path]))


@pytest.mark.parametrize("path", sorted(RETURNS.glob("*.csv")), ids=lambda p: p.stem)
def test_every_returned_csv(path: Path) -> None:
    assert_same(*both(make_plan(load_spec(RETURNS / "study.toml")), [path]))


@pytest.mark.parametrize(("delimiter", "decimal_comma"), [(",", False), (";", True), ("\t", False)])
def test_csv_dialects(plan: Plan, filled: Path, tmp_path: Path, delimiter: str, decimal_comma: bool) -> None:
    assert_same(*both(plan, [tc.to_csv(filled, tmp_path / "r.csv", delimiter, decimal_comma)]))


def test_sorted_lowercase_codes(plan: Plan, filled: Path, tmp_path: Path) -> None:
    path = tc.to_csv(filled, tmp_path / "r.csv", transform=lambda c: c.lower().replace("-", ""), sort=True)
    assert_same(*both(plan, [path]))


def test_two_files_with_duplicates_and_conflicts(plan: Plan, filled: Path, tmp_path: Path) -> None:
    """A workbook and a CSV copy with one value changed: every slot twice, one of them in conflict."""
    values = tc.published_fill(plan)
    changed = tc.edited(filled, tmp_path / "c.xlsx", tc._append_copy(tc._changed_value)(plan, values))
    assert_same(*both(plan, [changed, tc.to_csv(filled, tmp_path / "copy.csv")]))


@pytest.mark.parametrize("cut", [4, 0])
def test_rows_shorter_than_the_header(plan: Plan, filled: Path, tmp_path: Path, cut: int) -> None:
    """A CSV whose every row is shorter than its header (the value columns never typed), or has only blank lines:
    the same check both ways, and no traceback (the columns of such rows were once taken past their end)."""
    table = read_returned(filled)
    lines = [",".join(table.headers)] + [",".join(rows.cell_text(c) for c in cells[:cut]) for _, cells in table.rows]
    path = tmp_path / "short.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    quick, slow = both(plan, [path])
    assert_same(quick, slow)
    assert quick.errors  # values or whole units missing, said as findings


def test_a_whole_number_too_large_to_keep(tmp_path: Path) -> None:
    """A count with no upper limit typed as 1e20 (or 20 digits) is refused as out of range, both ways; it cannot
    be held by the tidy table's 64-bit integers and once ended the check with an OverflowError traceback."""
    spec = loads_spec(
        "[study]\nid = 'BG1'\ntitle = 't'\nseed = 3\n[design]\ntype = 'crd'\nreplicates = 2\nsubsamples = 3\n"
        "treatments = ['a', 'b']\n[[response]]\nname = 'count'\nkind = 'integer'\nmin = 0\n",
        "big.toml",
    )
    big_plan = make_plan(spec)
    typed = ["99999999999999999999", "1e20", "9223372036854775807", "12"]
    path = tmp_path / "big.csv"
    lines = [f"{s.code},{typed[k % len(typed)]}" for k, s in enumerate(big_plan.slots)]
    path.write_text("code,count\n" + "\n".join(lines) + "\n", encoding="utf-8")
    quick, slow = both(big_plan, [path])
    assert_same(quick, slow)
    whole = [typed[k % len(typed)] == "12" for k in range(len(big_plan.slots))]
    assert sum(f.kind.value == "out-of-range" for f in quick.findings) == whole.count(False)
    assert quick.tidy["count"].dropna().tolist() == [12] * whole.count(True)


def test_approved_fixes(tmp_path: Path) -> None:
    """test_fixes' study (a workbook and a re-typed CSV with a slip, a lost decimal point, a conflict and a
    foreign row), checked with every proposed fix approved: both sides of the conflict too, so a bad-fix is
    among what is compared."""
    from tests import test_fixes as tf

    fx_plan = make_plan(loads_spec(tf.SPEC, "fx.toml"))
    study = tf.make_study(fx_plan, tmp_path)
    paths = [study["book"], study["csv"]]
    proposed = check_returns(fx_plan, paths).proposals
    assert proposed
    fixes = tmp_path / "fixes.csv"
    tf.approve(
        [{k: str(p.get(k) or "") for k in (*FIX_COLUMNS, "finding")} for p in proposed],
        fixes,
        **{p["fix"]: p["value"] or study["true_high"] for p in proposed},
    )
    quick, slow = both(fx_plan, paths, fixes)
    assert quick.fixes
    assert_same(quick, slow)
    assert [a.to_dict() for a in quick.fixes] == [a.to_dict() for a in slow.fixes]


def test_libreoffice_resaves(plan: Plan, filled: Path, soffice: str, tmp_path: Path) -> None:
    """The filled workbook, with a conflicting copy row, re-saved by LibreOffice as .xlsx, .ods and .csv."""
    from tests.conftest import libreoffice_convert

    values = tc.published_fill(plan)
    changed = tc.edited(filled, tmp_path / "c.xlsx", tc._append_copy(tc._changed_value)(plan, values))
    for fmt in ("xlsx", "ods", "csv"):
        resaved = libreoffice_convert(soffice, changed, fmt, tmp_path / fmt)
        assert_same(*both(plan, [resaved]))


def test_swapped_units(plan: Plan, filled: Path, tmp_path: Path) -> None:
    path = tc.edited(filled, tmp_path / "swap.xlsx", tc._swap_units(plan, tc.published_fill(plan)))
    assert_same(*both(plan, [path]))


# cells a person or a spreadsheet program may leave in a row: every type calamine and csv give, and near misses
ODD_CELLS = st.one_of(
    st.none(),
    st.sampled_from(["", " ", "r1", "R1", "r3", "pale", "Pale", "purple", "lost", "note", "0", "50", "1", "2"]),
    st.sampled_from(["12", "12.5", "12.50", "12.55", "-0", "1,5", " 12", "1e3", "nan", "inf", "2026-05-01"]),
    st.floats(allow_nan=True, allow_infinity=True),
    st.sampled_from([0.0, -0.0, 1.0, 2.0, 12.5, 12.25, 1e-7, 59.9, 60.0, 60.1, 500.0, 1e16, 1e300]),
    st.integers(-5, 600),
    st.booleans(),
    st.just(dt.datetime(2026, 5, 1)),
    st.text(max_size=6),
)


def _odd_rows(
    plan: Plan, filled: Path, data: st.DataObject, decimal_comma: bool, rows: int, least: int
) -> tuple[ReturnedTable, Any, PlanIndex]:
    """The first clean rows of the filled workbook with `least` to 6 odd cells put anywhere, maybe a formula."""
    table = read_returned(filled)
    body = [(n, list(cells)) for n, cells in table.rows[:rows]]
    for _ in range(data.draw(st.integers(least, 6))):
        n = data.draw(st.integers(0, len(body) - 1))
        column = data.draw(st.integers(0, len(table.headers) - 1))
        codes = [plan.slots[0].code, plan.slots[1].code, plan.units[0].code]
        body[n][1][column] = data.draw(st.one_of(ODD_CELLS, st.sampled_from(codes)))
    odd = ReturnedTable(table.file, table.headers, table.header_row, body, decimal_comma=decimal_comma)
    odd.formulas = {(body[0][0], 8)} if data.draw(st.booleans()) else set()
    cols, _ = map_columns(odd, plan)
    return odd, cols, PlanIndex(plan)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data(), decimal_comma=st.booleans())
def test_random_cells_in_clean_rows(plan: Plan, filled: Path, data: st.DataObject, decimal_comma: bool) -> None:
    """Any cell put anywhere in a few clean rows: the same entries, unplaced rows and findings both ways."""
    odd, cols, idx = _odd_rows(plan, filled, data, decimal_comma, rows=6, least=1)
    assert check_rows(odd, cols, idx, quick=True) == check_rows(odd, cols, idx, quick=False)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(data=st.data(), decimal_comma=st.booleans())
def test_random_cells_in_clean_rows_in_columns(
    plan: Plan, filled: Path, data: st.DataObject, decimal_comma: bool
) -> None:
    """The same odd cells through take_clean: the rows it keeps in columns are exactly those FastRows takes with
    every required value filled, their arrays hold the Entry's values, and with the rest checked row by row the
    entries, unplaced rows and findings are those of the per-row path."""
    from layout.intake.cleanrows import take_clean

    odd, cols, idx = _odd_rows(plan, filled, data, decimal_comma, rows=8, least=0)
    block, rest = take_clean(odd, cols, idx)
    taken = [block.entry(k) for k in range(len(block))] if block else []  # each must be one FastRows takes
    required = [r.name for r in plan.spec.response if r.required]
    assert all(all(e.raw[n] for n in required) for e in taken)
    fast = fastrows.FastRows(odd, cols, idx)
    for number, cells in rest.rows:  # what was left is not a clean row with every required value
        e = fast.entry(number, cells)
        assert e is None or not all(e.raw[n] for n in required)
    for k, e in enumerate(taken):
        assert plan.slots[block.slots[k]] == e.slot and plan.rounds[block.rounds[k]].name == e.round
        for name in block.values:
            assert bool(block.has[name][k]) == (name in e.values)
            if name in e.values:
                assert block.values[name][k] == e.values[name]
    entries, unmatched, found = check_rows(rest, cols, idx, quick=False)
    slow = check_rows(odd, cols, idx, quick=False)
    assert (sorted([*entries, *taken], key=lambda e: e.row), unmatched, found) == slow


@settings(max_examples=300, deadline=None)
@given(
    st.lists(
        st.one_of(
            st.floats(),
            st.decimals(places=3, allow_nan=False, allow_infinity=False).map(float),
            st.integers(-(10**18), 10**18).map(lambda k: k / 1000),
            st.integers(-(10**18), 10**18).map(lambda k: float(np.nextafter(k / 100, np.inf))),
        ),
        min_size=1,
        max_size=30,
    ),
    st.sampled_from([0, 1, 2, 3, 6, 17]),
)
def test_decimals_in_numpy_equal_pythons_round(values: list[float], places: int) -> None:
    """take_clean's vectorised decimals test against Python's round (the reference: correctly rounded), on random
    floats, short decimals, values a unit in the last place away from them, and values too large for the shortcut."""
    from layout.intake.cleanrows import has_decimals

    got = has_decimals(np.array(values, dtype=float), values, places).tolist()
    assert got == [round(v, places) == v for v in values]


def test_the_plan_sheet_head_is_read_as_calamine_reads_it(filled: Path, soffice: str, tmp_path: Path) -> None:
    """The first rows of the hidden plan sheet, read from its XML alone, equal calamine's whole read
    (python-calamine as the reference reader); a LibreOffice re-save (shared strings) is left to calamine."""
    from python_calamine import CalamineWorkbook

    from layout.intake.readers import sheet_head
    from layout.meta import HIDDEN_SHEET
    from tests.conftest import libreoffice_convert

    whole = CalamineWorkbook.from_path(str(filled)).get_sheet_by_name(HIDDEN_SHEET).to_python(nrows=5)
    head = sheet_head(filled, HIDDEN_SHEET, 5)
    assert head is not None
    assert [[c for c in row if c != ""] for row in head] == [[c for c in row if c != ""] for row in whole]
    resaved = libreoffice_convert(soffice, filled, "xlsx", tmp_path / "resaved")
    assert sheet_head(resaved, HIDDEN_SHEET, 5) is None
    assert read_returned(resaved).fingerprint == read_returned(filled).fingerprint


def _unit_status_by_hand(tidy: pd.DataFrame) -> dict[tuple[str, str], str]:
    """The unit map's status as first written, slot by slot in Python, to compare the pandas version with."""
    order = ["ok", "declared-missing", "partial", "conflict", "error", "missing"]
    status: dict[tuple[str, str], list[str]] = {}
    for unit, rnd, s in zip(tidy["unit"], tidy["round"], tidy["status"], strict=True):
        if s != "unmatched":
            status.setdefault((unit, rnd), []).append(s)
    out = {}
    for key, values in status.items():
        if "missing" in values and not all(v == "missing" for v in values):
            values = [v if v != "missing" else "partial" for v in values]
        out[key] = max(values, key=order.index)
    return out


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from(["ok", "declared-missing", "conflict", "error", "missing", "unmatched"]), min_size=1))
def test_unit_status_in_pandas_equals_the_slot_by_slot_rule(statuses: list[str]) -> None:
    from layout.intake.report import _unit_status

    n = len(statuses)
    tidy = pd.DataFrame(
        {"unit": [f"U{i % 4}" for i in range(n)], "round": [f"r{i % 3 % 2}" for i in range(n)], "status": statuses}
    )
    result = CheckResult([], tidy, {})
    assert _unit_status(result) == _unit_status_by_hand(tidy)


@settings(max_examples=100, deadline=None)
@given(st.lists(st.sampled_from(["ok", "declared-missing", "conflict", "error", "missing", "unmatched"]), min_size=1))
def test_status_counts_equal_a_count_unit_by_unit(statuses: list[str]) -> None:
    """The large study's summary of the map, counted from arrays, against a count over every planned unit and
    round of the slot-by-slot statuses (a unit with no row in a round counted missing)."""
    from types import SimpleNamespace

    from layout.intake.report import STATUS_COLOURS, _status_counts

    n = len(statuses)
    tidy = pd.DataFrame(
        {"unit": [f"U{i % 5}" for i in range(n)], "round": [f"r{i % 3 % 2}" for i in range(n)], "status": statuses}
    )
    units = [SimpleNamespace(code=f"U{i}") for i in range(4)]  # U4 is in the table but not planned
    plan = SimpleNamespace(
        units=units,
        unit_by_code={u.code: u for u in units},
        rounds=[SimpleNamespace(name=r) for r in ("r0", "r1", "r2")],
    )
    by_hand = _unit_status_by_hand(tidy)
    expected = {r.name: dict.fromkeys(STATUS_COLOURS, 0) for r in plan.rounds}
    for u in units:
        for r in plan.rounds:
            expected[r.name][by_hand.get((u.code, r.name), "missing")] += 1
    with pytest.MonkeyPatch.context() as mp:  # a stand-in plan: the table's own units and rounds are coded
        mp.setattr("layout.intake.report.plan_row_codes", lambda *_: None)
        assert _status_counts(CheckResult([], tidy, {}), plan) == expected  # type: ignore[arg-type]


def _counts_by_hand(plan: Plan, tidy: pd.DataFrame) -> dict[str, dict[str, int]]:
    from layout.intake.report import STATUS_COLOURS

    by_hand = _unit_status_by_hand(tidy)
    out = {r.name: dict.fromkeys(STATUS_COLOURS, 0) for r in plan.rounds}
    for u in plan.units:
        for r in plan.rounds:
            out[r.name][by_hand.get((u.code, r.name), "missing")] += 1
    return out


def test_unit_status_of_real_checks(plan: Plan, filled: Path, tmp_path: Path) -> None:
    """The map's statuses and counts from the plan's rows coded once (a return of exactly the plan's rows) equal
    those from the table's own columns and the slot-by-slot rule: clean, with rows deleted, with conflicts and
    unplaced rows."""
    from layout.intake.report import _status_counts, _unit_status
    from layout.intake.tidy import plan_row_codes

    values = tc.published_fill(plan)
    fewer = tc.edited(filled, tmp_path / "f.xlsx", lambda ws, _col: ws.delete_rows(3, 5))
    changed = tc.edited(filled, tmp_path / "c.xlsx", tc._append_copy(tc._changed_value)(plan, values))
    odd = tc.edited(filled, tmp_path / "o.xlsx", tc._append_copy(tc._foreign_code)(plan, values))
    coded = []
    for paths in ([filled], [fewer], [changed, odd]):
        result = check_returns(plan, paths)
        coded.append(plan_row_codes(result.tidy, plan) is not None)
        assert _unit_status(result, plan) == _unit_status(result) == _unit_status_by_hand(result.tidy)
        assert _status_counts(result, plan) == _counts_by_hand(plan, result.tidy)
    assert coded == [True, True, False]  # the unplaced rows of the last take the general way


def _outliers_by_hand(values: dict[str, list[tuple[str, float]]], threshold: float) -> list[Any]:
    """find_outliers as first written: every unit in Python, the scale from a list of all pairwise differences."""
    import math

    import numpy as np

    from layout.intake.robust import _PAIR_TO_SD, Outlier

    groups = [[v for _, v in vs] for vs in values.values()]
    diffs = [abs(a - b) for g in groups for i, a in enumerate(g) for b in g[i + 1 :]]
    scale = float(np.median(diffs)) / _PAIR_TO_SD if diffs else 0.0
    if scale <= 0:
        return []
    found = []
    for unit, vs in values.items():
        s = len(vs)
        if s < 3:
            continue
        total = sum(v for _, v in vs)
        spread = scale * math.sqrt(1 + 1 / (s - 1))
        slot, v = max(vs, key=lambda sv: abs(sv[1] - (total - sv[1]) / (s - 1)))
        others = (total - v) / (s - 1)
        if abs(v - others) / spread > threshold:
            found.append(Outlier(slot, unit, v, others, abs(v - others) / spread))
    return found


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.lists(st.floats(-1e6, 1e6, allow_nan=False) | st.sampled_from([0.0, 1.0, 1.5, 2.0]), min_size=1, max_size=9),
        min_size=1,
        max_size=30,
    ),
    st.floats(0.5, 6.0),
)
def test_outliers_in_numpy_equal_the_unit_by_unit_rule(groups: list[list[float]], threshold: float) -> None:
    from layout.intake.robust import find_outliers

    values = {f"U{i}": [(f"U{i}-{j}", v) for j, v in enumerate(g)] for i, g in enumerate(groups)}
    assert find_outliers(values, threshold) == _outliers_by_hand(values, threshold)


CELLS = st.one_of(st.none(), st.text(max_size=8), st.sampled_from(["a,b", 'q"r', "x\ny", "a\rb", " sp", "=1", ""]))


@settings(max_examples=200, deadline=None)
@given(
    st.lists(
        st.tuples(
            st.none() | st.integers(-(2**53), 2**53),
            st.none() | st.floats(),
            CELLS,
            st.none() | st.integers(0, 300) | st.integers(2**17 - 2, 2**17 + 2),  # written from a table of texts
        ),
        max_size=20,
    ),
)
def test_tidy_csv_writes_what_pandas_writes(rows: list[tuple[Any, Any, Any, Any]]) -> None:
    """tidy_csv against pandas' DataFrame.to_csv (the reference writer) on nullable integers and floats and odd text."""
    from layout.intake.tidy import tidy_csv

    frame = pd.DataFrame(
        {
            "serial": pd.array([r[0] for r in rows], dtype="Int64"),
            "mass": pd.array([r[1] for r in rows], dtype="Float64"),
            "note": pd.Series([r[2] for r in rows], dtype=object),
            "code": pd.Series([r[2] or "x" for r in rows], dtype="str"),
            "row": pd.array([r[3] for r in rows], dtype="Int64"),
        }
    )
    assert tidy_csv(frame) == frame.to_csv(index=False, lineterminator="\n")


def test_tidy_csv_of_real_checks(plan: Plan, filled: Path, tmp_path: Path) -> None:
    """The tidy tables of a clean return and of a return with conflicts, duplicates and unplaced rows."""
    from layout.intake.tidy import tidy_csv

    values = tc.published_fill(plan)
    changed = tc.edited(filled, tmp_path / "c.xlsx", tc._append_copy(tc._changed_value)(plan, values))
    odd = tc.edited(filled, tmp_path / "o.xlsx", tc._append_copy(tc._foreign_code)(plan, values))
    for paths in ([filled], [changed, odd, tc.to_csv(filled, tmp_path / "copy.csv")]):
        tidy = check_returns(plan, paths).tidy
        assert tidy_csv(tidy) == tidy.to_csv(index=False, lineterminator="\n")
        assert tidy_csv(tidy, plan) == tidy.to_csv(index=False, lineterminator="\n")  # the plan's text made once
