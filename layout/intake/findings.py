"""Findings: one frozen record per problem found in the returned files."""

from __future__ import annotations

from dataclasses import asdict, dataclass
from enum import StrEnum
from typing import Any


class Severity(StrEnum):
    ERROR = "error"
    WARNING = "warning"
    INFO = "info"


class Kind(StrEnum):
    """What was found; the values are the names used in reports."""

    UNREADABLE_FILE = "unreadable-file"
    WRONG_PLAN = "wrong-plan"
    MISSING_COLUMN = "missing-column"
    EXTRA_COLUMN = "extra-column"
    BLANK_CODE = "blank-code"
    BAD_CODE = "bad-code"
    UNKNOWN_CODE = "unknown-code"
    DUPLICATE_SLOT = "duplicate-slot"
    CONFLICTING_SLOT = "conflicting-slot"
    UNIT_MISMATCH = "unit-mismatch"
    NOT_A_NUMBER = "not-a-number"
    OUT_OF_RANGE = "out-of-range"
    NOT_A_LEVEL = "not-a-level"
    BAD_DATE = "bad-date"
    FORMULA_CELL = "formula-cell"
    TOO_MANY_DECIMALS = "too-many-decimals"
    MISSING_VALUE = "missing-value"
    DECLARED_MISSING = "declared-missing"
    REASON_WITH_VALUE = "reason-with-value"
    MISSING_SLOT = "missing-slot"
    MISSING_UNIT = "missing-unit"
    OUTLIER_SUBSAMPLE = "outlier-subsample"
    POSSIBLE_SWAP = "possible-swap"
    BAD_FIX = "bad-fix"


_WARNINGS = {
    Kind.EXTRA_COLUMN,
    Kind.DUPLICATE_SLOT,
    Kind.FORMULA_CELL,
    Kind.TOO_MANY_DECIMALS,
    Kind.REASON_WITH_VALUE,
    Kind.OUTLIER_SUBSAMPLE,
    Kind.POSSIBLE_SWAP,
}
_INFO = {Kind.DECLARED_MISSING}


def severity_of(kind: Kind) -> Severity:
    """The usual severity of a kind (a missing structure column is downgraded where it is made)."""
    if kind in _INFO:
        return Severity.INFO
    return Severity.WARNING if kind in _WARNINGS else Severity.ERROR


@dataclass(frozen=True)
class Finding:
    """One problem, with where it is."""

    kind: Kind
    severity: Severity
    message: str
    file: str | None = None
    row: int | None = None
    code: str | None = None
    unit: str | None = None
    column: str | None = None
    value: str | None = None
    suggestion: str | None = None
    cause: str | None = None  # the file whose problem this finding follows from, when it does

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON data, kind and severity as their names."""
        d = asdict(self)
        d["kind"], d["severity"] = self.kind.value, self.severity.value
        return d

    @property
    def where(self) -> str:
        """'file, row n, code X, column c' as far as known."""
        parts = [
            p
            for p in (
                self.file,
                f"row {self.row}" if self.row else None,
                f"code {self.code}" if self.code else None,
                f"column {self.column!r}" if self.column else None,
            )
            if p
        ]
        return ", ".join(parts)


def finding(kind: Kind, message: str, severity: Severity | None = None, **where: Any) -> Finding:
    """A Finding with the kind's usual severity unless one is given; values are shown as text."""
    if "value" in where and where["value"] is not None and not isinstance(where["value"], str):
        where["value"] = show_value(where["value"])
    return Finding(kind, severity or severity_of(kind), message, **where)


def show_value(value: Any) -> str:
    """A cell value as text for reports: whole floats without '.0'."""
    if isinstance(value, float) and value.is_integer():
        return str(int(value))
    return str(value)
