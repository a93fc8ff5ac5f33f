"""Everything that goes to the field or the bench, made from a Plan alone (imported when first used)."""

from __future__ import annotations

from typing import Any

__all__ = ["PRODUCTS", "SheetOptions", "write_sheets"]


def __getattr__(name: str) -> Any:
    if name not in __all__:
        raise AttributeError(f"module 'layout.outputs' has no attribute {name!r}")
    from layout.outputs import write

    return getattr(write, name)
