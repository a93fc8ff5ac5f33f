"""One vocabulary of the names layout reserves: columns of the sheets and the tidy table, status words, aliases.

Spec validation, the workbook, the reader and the tidy table all take their names from
here, so a factor or response can never take a name that one of them uses.
"""

from __future__ import annotations

import re
from typing import Final

# columns of the entry sheet that say where a row belongs
STRUCTURE_COLUMNS: Final = ("code", "unit", "block", "row", "col", "subsample", "round", "treatment")
# columns people fill in besides the responses
TRAILING_COLUMNS: Final = ("missing_reason", "note")
# plan columns of tidy.csv that the entry sheet does not have
PLAN_ONLY_COLUMNS: Final = ("serial", "whole_plot")
# what tidy.csv adds about each row
STATUS_COLUMNS: Final = ("raw", "status", "source_file", "source_row", "fix")
STATUS_WORDS: Final = ("ok", "missing", "conflict", "error", "declared-missing", "unmatched")
# other headers people write for a column; a response of that name keeps its own column
ALIASES: Final = {"missing reason": "missing_reason", "reason": "missing_reason", "notes": "note", "column": "col"}
# cells typed in columns the plan does not have go to tidy.csv under this prefix
ADDED_PREFIX: Final = "added: "

RESERVED: Final = frozenset(STRUCTURE_COLUMNS + TRAILING_COLUMNS + PLAN_ONLY_COLUMNS + STATUS_COLUMNS)


def normal(header: object) -> str:
    """A header as compared: trimmed, lower case, single spaces."""
    return " ".join(str(header or "").strip().lower().split())


def name_key(name: str) -> str:
    """A name as compared for clashes: lower case, with spaces and hyphens as underscores."""
    return re.sub(r"[\s\-]+", "_", name.strip().lower())


def clash(name: str) -> str | None:
    """Why a factor or response may not be called name, or None when it may."""
    key = name_key(name)
    if key in RESERVED:
        return f"{name!r} is the name of a column layout writes itself"
    if key.startswith(name_key(ADDED_PREFIX)):
        return f"{name!r} starts with {ADDED_PREFIX.strip()!r}, which marks added columns in tidy.csv"
    return None
