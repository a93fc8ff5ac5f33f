"""Write the returned files of this folder: the published flatworm densities, each file with one planted fault.

Run by hand when the plan format changes:  python -m tests.returns.make_cases
Each NAME.csv is checked by tests/test_returns.py against NAME.csv.expected.
"""

from __future__ import annotations

import csv
from collections.abc import Callable
from pathlib import Path

from layout import load_spec, make_plan
from tests.published import flatworm_fill

HERE = Path(__file__).parent
Rows = list[list[str]]


def base() -> tuple[list[str], Rows]:
    plan = make_plan(load_spec(HERE / "study.toml"))
    unit_of = {s.code: s.unit for s in plan.slots}
    sub_of = {s.code: s.subsample for s in plan.slots}
    head = ["code", "unit", "subsample", "density", "cover", "sampled", "missing_reason", "note"]
    rows = [[c, unit_of[c], str(sub_of[c]), f"{v:.7f}", "", "", "", ""] for c, _, v in flatworm_fill(plan)]
    return head, rows


def edit(col: str, value: str, row: int = 4) -> Callable[[list[str], Rows], None]:
    def apply(head: list[str], rows: Rows) -> None:
        rows[row][head.index(col)] = value

    return apply


def append_copy(change: Callable[[list[str], list[str]], None] | None = None, row: int = 4) -> Callable:
    def apply(head: list[str], rows: Rows) -> None:
        copy = list(rows[row])
        if change:
            change(head, copy)
        rows.append(copy)

    return apply


def drop_rows(first: int, count: int = 1) -> Callable:
    def apply(head: list[str], rows: Rows) -> None:
        del rows[first : first + count]

    return apply


def drop_column(col: str) -> Callable:
    def apply(head: list[str], rows: Rows) -> None:
        i = head.index(col)
        del head[i]
        for r in rows:
            del r[i]

    return apply


def add_column(col: str, value: str) -> Callable:
    def apply(head: list[str], rows: Rows) -> None:
        head.append(col)
        for r in rows:
            r.append(value)

    return apply


def set_many(changes: list[tuple[int, str, str]]) -> Callable:
    def apply(head: list[str], rows: Rows) -> None:
        for row, col, value in changes:
            rows[row][head.index(col)] = value

    return apply


def typo(head: list[str], rows: Rows) -> None:
    code = rows[4][0]
    rows[4][0] = code[:5] + code[6] + code[5] + code[7:]  # two serial digits swapped


CASES: dict[str, Callable[[list[str], Rows], None] | None] = {
    "clean": None,
    "blank-code": edit("code", ""),
    "bad-code": typo,
    "unknown-code": edit("code", "ZQ9-001-1A"),
    "duplicate-slot": append_copy(),
    "conflicting-slot": append_copy(lambda h, r: r.__setitem__(h.index("density"), "9.9000000")),
    "unit-mismatch": edit("subsample", "2"),
    "not-a-number": edit("density", "many"),
    "out-of-range": edit("density", "-1.0000000"),
    "not-a-level": edit("cover", "algea"),
    "bad-date": edit("sampled", "2001-13-40"),
    "date-out-of-range": edit("sampled", "2002-03-01"),
    "too-many-decimals": edit("density", "0.647682912"),
    "missing-value": edit("density", ""),
    "declared-missing": set_many([(4, "density", ""), (4, "missing_reason", "lost")]),
    "reason-with-value": edit("missing_reason", "damaged"),
    "missing-slot": drop_rows(4),
    "missing-unit": drop_rows(6, 6),
    "extra-column": add_column("water depth", "shallow"),
    "missing-column": drop_column("density"),
    "outlier-subsample": edit("density", "900.0000000"),
}


def main() -> None:
    for name, change in CASES.items():
        head, rows = base()
        if change:
            change(head, rows)
        with (HERE / f"{name}.csv").open("w", newline="", encoding="utf-8") as fh:
            csv.writer(fh, lineterminator="\n").writerows([head, *rows])
    (HERE / "unreadable-file.csv").write_bytes(b"code,density\n\x00\x00\x00\n")


if __name__ == "__main__":
    main()
