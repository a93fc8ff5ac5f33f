"""Turn one returned cell into a value of its response's kind, or say what is wrong with it."""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass
from datetime import date, datetime, timedelta
from typing import Any, Final

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


def close_to(text: str, choices: list[str]) -> str | None:
    """The choice a typed word most likely meant: same apart from case, spaces and underscores, or one edit away."""
    key = _squash(text)
    for c in choices:
        if _squash(c) == key:
            return c
    near = [c for c in choices if _one_edit(key, _squash(c))]
    if len(near) == 1:
        return near[0]
    found = difflib.get_close_matches(text, choices, n=1, cutoff=0.75)
    return found[0] if found else None


def _squash(text: str) -> str:
    return re.sub(r"[\s_\-]+", "", str(text).lower())


def _one_edit(a: str, b: str) -> bool:
    """Whether a and b differ by one changed, inserted or dropped character or one swap of neighbours."""
    if a == b or abs(len(a) - len(b)) > 1:
        return False
    if len(a) == len(b):
        diff = [i for i in range(len(a)) if a[i] != b[i]]
        return len(diff) == 1 or (
            len(diff) == 2 and diff[1] == diff[0] + 1 and a[diff[0]] == b[diff[1]] and a[diff[1]] == b[diff[0]]
        )
    short, long = sorted((a, b), key=len)
    return any(long[:i] + long[i + 1 :] == short for i in range(len(long)))


def excess_decimals(cell: Any, r: Response, decimal_comma: bool = False) -> int:
    """How many decimals a number cell has beyond the response's decimals (0 when fine or unknown)."""
    if r.kind != "number" or r.decimals is None or isinstance(cell, bool):
        return 0
    if isinstance(cell, (int, float)):
        text = repr(float(cell)) if isinstance(cell, float) else str(cell)
        if "e" in text or "E" in text:
            return 0
    else:
        text = str(cell).strip().replace(" ", "")
        if decimal_comma:
            text = text.replace(".", "").replace(",", ".")
    places = len(text.split(".", 1)[1].rstrip("0")) if "." in text else 0
    return places if places > r.decimals else 0


def is_blank(cell: Any) -> bool:
    """True for an empty cell, or one holding only spaces."""
    return cell is None or (isinstance(cell, str) and not cell.strip())


WHOLE_LIMIT: Final = 2.0**63  # whole numbers are kept as 64-bit integers (the tidy table's Int64 columns)


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
        if r.kind == "integer" and not -WHOLE_LIMIT < x < WHOLE_LIMIT:
            return Parsed(
                problem=Kind.OUT_OF_RANGE,
                message=f"is too large to be kept as a whole number; {r.header} must be {_expect(r)}",
            )
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
        hint = close_to(text, list(levels))
        more = f"; did you mean {hint!r}?" if hint else ""
        return Parsed(problem=Kind.NOT_A_LEVEL, message=f"is not one of {', '.join(levels)}{more}", suggestion=hint)
    if r.kind == "date":
        d = _date(cell)
        if d is None:
            return Parsed(problem=Kind.BAD_DATE, message="is not a date; write it as YYYY-MM-DD")
        if (r.min is not None and d < _as_date(r.min)) or (r.max is not None and d > _as_date(r.max)):
            return Parsed(
                problem=Kind.OUT_OF_RANGE, message=f"is outside the allowed dates; {r.header} must be {_expect(r)}"
            )
        return Parsed(d.isoformat())
    return Parsed(str(cell).strip())


def _as_date(bound: Any) -> date:
    return bound if isinstance(bound, date) else date.fromisoformat(str(bound))


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
