"""Property-based fuzzing of everything a user hands to layout: returned workbooks and CSVs, and specs.

Hypothesis mutates real returns (a filled entry.xlsx and its CSV, with published values):
byte flips, truncation, corrupted zip parts, random cell contents of every type, shuffled
and duplicated rows and columns; and it writes random spec documents. For every case the
command line must end with exit 0, 1 or 2 (never a traceback), write a report for every
exit 1, leave the input unchanged, and finish within 30 s and 1 GiB.

The default suite runs a small fixed sample; `pytest -m fuzz` runs the long one
(FUZZ_EXAMPLES per test, 1,000 by default: 4,000 cases over the four tests).
"""

from __future__ import annotations

import contextlib
import csv
import datetime as dt
import hashlib
import io
import json
import os
import random
import resource
import tempfile
import time
import zipfile
from pathlib import Path
from typing import Any

import openpyxl
import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from openpyxl.utils.exceptions import IllegalCharacterError

from layout import loads_spec, make_plan
from layout.cli import main
from layout.outputs.workbook import workbook_bytes
from layout.simulate import Filled, fill_workbook
from tests.published import nist_values

SPEC = """
[study]
id = "FZ1"
title = "Fuzzed returns"
seed = 31
[design]
type = "rcbd"
blocks = 2
subsamples = 2
treatments = ["a", "b", "c"]
[[response]]
name = "y"
kind = "number"
min = 0
max = 1000
decimals = 1
[[response]]
name = "state"
kind = "category"
levels = ["ok", "poor"]
required = false
[[response]]
name = "on"
kind = "date"
required = false
"""

LONG = int(os.environ.get("FUZZ_EXAMPLES", "1000"))
SHORT = 6
GIB = 1024**3
STATS: dict[str, Any] = {"cases": 0, "exits": {}, "slowest": 0.0}


def _settings(n: int) -> settings:
    return settings(
        max_examples=n,
        deadline=None,
        derandomize=n == SHORT,  # the default suite's sample is the same on every run
        suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow, HealthCheck.data_too_large],
    )


@pytest.fixture(scope="module")
def corpus(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    """plan.json, a filled workbook (NIST StRD SmLs01 values) and the same returns as CSV."""
    folder = tmp_path_factory.mktemp("corpus")
    plan = make_plan(loads_spec(SPEC, "fz.toml"))
    plan.save(folder / "plan.json")
    blank = folder / "entry.xlsx"
    blank.write_bytes(workbook_bytes(plan))
    values = iter(nist_values("SmLs01"))
    filled = {(s.code, plan.rounds[0].name): Filled({"y": round(next(values), 1)}, None) for s in plan.slots}
    book = fill_workbook(plan, blank, folder / "filled.xlsx", filled)
    wb = openpyxl.load_workbook(book, read_only=True)
    rows = [[("" if c is None else c) for c in r] for r in wb["entry"].iter_rows(values_only=True)]
    wb.close()
    text = io.StringIO()
    csv.writer(text).writerows(rows)
    return Corpus(plan=plan, plan_path=folder / "plan.json", xlsx=book.read_bytes(), csv=text.getvalue())


class Corpus(dict):
    """The base files; shown by name only when hypothesis reports a failing case."""

    def __repr__(self) -> str:
        return "corpus"


def run_check(corpus: dict[str, Any], name: str, data: bytes) -> int:
    """layout check on one file in a fresh folder, with every property of the contract asserted."""
    with tempfile.TemporaryDirectory() as tmp:
        target = Path(tmp) / name
        target.write_bytes(data)
        out = Path(tmp) / "checked"
        started = time.monotonic()
        with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
            code = main(["check", str(corpus["plan_path"]), str(target), "-o", str(out)])
        took = time.monotonic() - started
        assert code in (0, 1, 2), code
        if code in (0, 1):
            json.loads((out / "report.json").read_text(encoding="utf-8"))  # written and whole
        assert hashlib.sha256(target.read_bytes()).digest() == hashlib.sha256(data).digest()
        assert took < 30, f"{took:.1f} s"
        assert resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024 < GIB
    STATS["cases"] += 1
    STATS["exits"][code] = STATS["exits"].get(code, 0) + 1
    STATS["slowest"] = max(STATS["slowest"], took)
    return code


# ---- mutations ---------------------------------------------------------------------------------


def flip_bytes(data: bytes, picks: list[tuple[float, int]]) -> bytes:
    out = bytearray(data)
    for where, value in picks:
        out[int(where * (len(out) - 1))] = value
    return bytes(out)


def corrupt_part(xlsx: bytes, part: float, picks: list[tuple[float, int]], cut: float | None) -> bytes:
    """One part of the workbook's zip with flipped bytes or cut short, re-packed so the zip itself is sound."""
    src = zipfile.ZipFile(io.BytesIO(xlsx))
    names = src.namelist()
    victim = names[int(part * (len(names) - 1))]
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as dst:
        for n in names:
            data = src.read(n)
            if n == victim:
                data = flip_bytes(data, picks) if data else data
                if cut is not None:
                    data = data[: int(cut * len(data))]
            dst.writestr(n, data)
    return buf.getvalue()


CELL_VALUES = st.one_of(
    st.none(),
    st.text(max_size=40),
    st.integers(min_value=-(2**63), max_value=2**63),
    st.floats(allow_nan=True, allow_infinity=True),
    st.booleans(),
    st.datetimes(min_value=dt.datetime(1900, 3, 1), max_value=dt.datetime(9999, 1, 1)),
    st.sampled_from(["=1/0", "=A1", "=SUM(B:B)", "#N/A", "  ", "ok", "OK ", "poor", "1,5", "2026-02-30", "1e309"]),
)


def edit_cells(xlsx: bytes, edits: list[tuple[float, float, Any]]) -> bytes:
    wb = openpyxl.load_workbook(io.BytesIO(xlsx))
    ws = wb["entry"]
    ws.protection.sheet = False
    for r, c, value in edits:
        cell = ws.cell(1 + int(r * (ws.max_row + 1)), 1 + int(c * (ws.max_column + 1)))
        with contextlib.suppress(ValueError, TypeError, IllegalCharacterError):  # openpyxl refuses some values
            cell.value = value
    buf = io.BytesIO()
    try:
        wb.save(buf)
    except Exception:  # openpyxl cannot write some control characters: not a case layout ever sees
        assume(False)
    return buf.getvalue()


def reshape_csv(text: str, seed: int, dup_rows: int, dup_cols: int, drop_cols: int) -> bytes:
    """Rows shuffled and some repeated; columns shuffled, repeated and dropped."""
    rng = random.Random(seed)
    rows = list(csv.reader(io.StringIO(text)))
    head, body = rows[0], rows[1:]
    body += [rng.choice(body) for _ in range(dup_rows)]
    rng.shuffle(body)
    order = list(range(len(head)))
    rng.shuffle(order)
    order += [rng.choice(order) for _ in range(dup_cols)]
    order = order[drop_cols:]
    out = io.StringIO()
    csv.writer(out).writerows([[r[i] if i < len(r) else "" for i in order] for r in [head, *body]])
    return out.getvalue().encode()


PICKS = st.lists(st.tuples(st.floats(0, 1), st.integers(0, 255)), min_size=1, max_size=12)


def _bytes_case(n: int):  # noqa: ANN202
    @_settings(n)
    @given(
        kind=st.sampled_from(["xlsx", "csv"]),
        picks=PICKS,
        cut=st.one_of(st.none(), st.floats(0, 1)),
        zipped=st.booleans(),
        part=st.floats(0, 1),
    )
    def case(corpus: dict[str, Any], kind: str, picks: list, cut: float | None, zipped: bool, part: float) -> None:
        """Byte flips and truncation of a whole file, or of one part inside the workbook's zip."""
        if kind == "xlsx" and zipped:
            data = corrupt_part(corpus["xlsx"], part, picks, cut)
        else:
            data = flip_bytes(corpus[kind] if kind == "xlsx" else corpus[kind].encode(), picks)
            if cut is not None:
                data = data[: int(cut * len(data))]
        run_check(corpus, f"returned.{kind}", data)

    return case


def _cells_case(n: int):  # noqa: ANN202
    @_settings(n)
    @given(edits=st.lists(st.tuples(st.floats(0, 1), st.floats(0, 1), CELL_VALUES), min_size=1, max_size=15))
    def case(corpus: dict[str, Any], edits: list) -> None:
        """Random cells of every type written anywhere in the entry sheet, headers included."""
        run_check(corpus, "returned.xlsx", edit_cells(corpus["xlsx"], edits))

    return case


def _shape_case(n: int):  # noqa: ANN202
    @_settings(n)
    @given(
        seed=st.integers(0, 2**32),
        dup_rows=st.integers(0, 5),
        dup_cols=st.integers(0, 3),
        drop_cols=st.integers(0, 4),
    )
    def case(corpus: dict[str, Any], seed: int, dup_rows: int, dup_cols: int, drop_cols: int) -> None:
        """Rows and columns shuffled, duplicated and dropped in the CSV."""
        code = run_check(corpus, "returned.csv", reshape_csv(corpus["csv"], seed, dup_rows, dup_cols, drop_cols))
        if dup_rows == dup_cols == drop_cols == 0:
            assert code == 0  # order alone never matters: rows are matched by code, columns by header

    return case


KEYS = st.sampled_from(["id", "title", "seed", "type", "blocks", "replicates", "subsamples", "name", "kind", "levels",
                        "treatments", "rows", "cols", "walk", "min", "max", "decimals", "rounds", "blind", "unit_name"])  # fmt: skip
LEAVES = st.one_of(
    st.none(), st.booleans(), st.integers(-5, 10**20), st.floats(), st.text(max_size=12),
    st.sampled_from(["crd", "rcbd", "latin-square", "split-plot", "number", "category", "T1"]),
)  # fmt: skip
DOCS = st.recursive(
    st.dictionaries(KEYS, LEAVES, max_size=5),
    lambda inner: st.one_of(
        st.dictionaries(
            st.one_of(KEYS, st.sampled_from(["study", "design", "response", "factor", "layout", "collection"])),
            inner,
            max_size=6,
        ),
        st.lists(inner, max_size=3),
    ),  # fmt: skip
    max_leaves=25,
)


def _spec_case(n: int):  # noqa: ANN202
    @_settings(n)
    @given(doc=DOCS)
    def case(doc: Any) -> None:
        """A random spec document: `layout plan` makes a plan or refuses it with exit 2, never a traceback."""
        with tempfile.TemporaryDirectory() as tmp:
            spec = Path(tmp) / "spec.json"
            spec.write_text(json.dumps(doc, default=str), encoding="utf-8")
            with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
                code = main(["plan", str(spec), "-o", str(Path(tmp) / "plan.json")])
            assert code in (0, 2)
        STATS["cases"] += 1

    return case


test_bytes_sample = _bytes_case(SHORT)
test_cells_sample = _cells_case(SHORT)
test_shape_sample = _shape_case(SHORT)
test_spec_sample = _spec_case(SHORT)
test_bytes_long = pytest.mark.fuzz(_bytes_case(LONG))
test_cells_long = pytest.mark.fuzz(_cells_case(LONG))
test_shape_long = pytest.mark.fuzz(_shape_case(LONG))
test_spec_long = pytest.mark.fuzz(_spec_case(LONG))


@pytest.fixture(scope="module", autouse=True)
def _figures() -> Any:
    """After the module: the case count, the exits and the slowest case, for the README's Data safety figures."""
    yield
    if STATS["cases"]:
        print(f"\nfuzz: {STATS['cases']} cases, exits {STATS['exits']}, slowest {STATS['slowest']:.2f} s, "
              f"peak memory {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss // 1024} MB")  # fmt: skip
