"""Text for CSV files that people open in a spreadsheet: never read there as a formula.

OWASP, "CSV Injection": a cell that begins with =, +, -, @, a tab or a carriage return may be
taken for a formula by Excel or LibreOffice; a leading apostrophe makes it plain text there.
Files meant for analysis software (tidy.csv) are written exactly and do not use this.
"""

from __future__ import annotations

from typing import Final

TRIGGERS: Final = ("=", "+", "-", "@", "\t", "\r")


def neutral(cell: object) -> object:
    """The cell as written to a spreadsheet-facing CSV: text that could start a formula gets an apostrophe."""
    if isinstance(cell, str) and cell.lstrip("'").startswith(TRIGGERS):  # "'=x" too, so restored() is exact
        return "'" + cell
    return cell


def restored(text: str) -> str:
    """A cell read back from such a CSV: the apostrophe that neutral() added is taken off again."""
    if text.startswith("'") and text.lstrip("'").startswith(TRIGGERS):
        return text[1:]
    return text
