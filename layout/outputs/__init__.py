"""Everything that goes to the field or the bench, made from a Plan alone."""

from layout.outputs.write import PRODUCTS, SheetOptions, write_sheets

__all__ = ["PRODUCTS", "SheetOptions", "write_sheets"]
