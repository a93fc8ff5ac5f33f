"""The tool's version and the names of its file formats; imported by every part, importing none."""

from __future__ import annotations

from typing import Final

__version__: Final = "0.2.0"
PLAN_FORMAT: Final = "layout-plan/2"
ENTRY_FORMAT: Final = "layout-entry/2"
HIDDEN_SHEET: Final = "layout_plan"  # the very hidden sheet of entry.xlsx
PRODUCTS: Final = ("entry", "sheets", "labels", "map", "key")  # what `layout sheets` can write
