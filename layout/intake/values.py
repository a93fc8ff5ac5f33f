"""Turn one returned cell into a value of its response's kind, or say what is wrong with it."""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass
from datetime import date, datetime, timedelta
from typing import Any

from layout.intake.findings import Kind
from layout.spec import Response

_NUMBER = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?")
_SPREADSHEET_EPOCH = date(1899, 12, 30)


@dataclass(frozen=True)
class Parsed:
    """A parsed cell: value, or the kind of problem and a message."""

    value: Any = None
    problem: Kind | None = None
    message: str = ""
    suggestion: str | None = None


def is_blank(cell: Any) -> bool:
    """True for an empty cell, or one holding only spaces."""
    return cell is None or (isinstance(cell, str) and not cell.strip())


def _number(cell: Any, decimal_comma: bool) -> float | None:
    if isinstance(cell, bool):
        return None
    if isinstance(cell, (int, float)):
        return float(cell) if math.isfinite(float(cell)) else None
    text = str(cell).strip().replace("\u00a0", "").replace(" ", "")
    if decimal_comma and "," in text:
        text = text.replace(".", "").replace(",", ".")  # 1.234,5 → 1234.5
    return float(text) if _NUMBER.fullmatch(text) else None


def parse(cell: Any, r: Response, decimal_comma: bool = False) -> Parsed:
    """The value of a non-blank cell for response r."""
    if r.kind in ("number", "integer"):
        x = _number(cell, decimal_comma)
        if x is None:
            return Parsed(problem=Kind.NOT_A_NUMBER, message=f"is not a number; {r.header} must be {_expect(r)}")
        if r.kind == "integer" and not x.is_integer():
            return Parsed(problem=Kind.NOT_A_NUMBER, message=f"is not a whole number; {r.header} must be {_expect(r)}")
        if (r.min is not None and x < r.min) or (r.max is not None and x > r.max):
            return Parsed(
                problem=Kind.OUT_OF_RANGE, message=f"is outside the allowed range; {r.header} must be {_expect(r)}"
            )
        return Parsed(int(x) if r.kind == "integer" else x)
    if r.kind == "category":
        levels = r.levels or ()
        text = str(cell).strip()
        for level in levels:
            if text.lower() == level.lower():
                return Parsed(level)
        near = difflib.get_close_matches(text.lower(), [lv.lower() for lv in levels], n=1, cutoff=0.6)
        hint = next((lv for lv in levels if near and lv.lower() == near[0]), None)
        return Parsed(problem=Kind.NOT_A_LEVEL, message=f"is not one of {', '.join(levels)}", suggestion=hint)
    if r.kind == "date":
        d = _date(cell)
        if d is None:
            return Parsed(problem=Kind.BAD_DATE, message="is not a date; write it as YYYY-MM-DD")
        return Parsed(d.isoformat())
    return Parsed(str(cell).strip())


def _expect(r: Response) -> str:
    return r.allowed_text


def _date(cell: Any) -> date | None:
    if isinstance(cell, datetime):
        return cell.date()
    if isinstance(cell, date):
        return cell
    if isinstance(cell, (int, float)) and not isinstance(cell, bool) and 1 <= cell < 2958466:
        return _SPREADSHEET_EPOCH + timedelta(days=int(cell))  # a date serial from a spreadsheet
    text = str(cell).strip()
    m = re.fullmatch(r"(\d{4})-(\d{1,2})-(\d{1,2})(?:[ T]00:00(?::00)?)?", text)
    if not m:
        return None
    try:
        return date(int(m.group(1)), int(m.group(2)), int(m.group(3)))
    except ValueError:
        return None
