"""Label geometry in millimetres and the placing of labels on pages.

Two forms: label sheets (a grid of labels on A4 or letter paper, with margins and gaps)
and single labels, one per page, for label printers.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Final

from layout.errors import UsageError

PAPER_MM: Final = {"a4": (210.0, 297.0), "letter": (215.9, 279.4)}
PAD_MM: Final = 1.5  # blank edge inside every label, so a slightly shifted print is not cut


@dataclass(frozen=True)
class LabelGeometry:
    """Where labels sit: a grid on a sheet of paper, or one label per page."""

    cols: int = 3
    rows: int = 8
    width: float = 64.0
    height: float = 34.0
    top: float = 12.5
    left: float = 7.0
    col_gap: float = 2.0
    row_gap: float = 0.0
    paper: str = "a4"
    single: bool = False

    @classmethod
    def for_paper(cls, paper: str) -> LabelGeometry:
        """The default label sheet for a paper size: 3 × 8 labels on A4 or on letter."""
        if paper == "letter":
            return cls(
                cols=3, rows=8, width=64.0, height=31.0, top=15.0, left=8.0, col_gap=3.0, row_gap=0.0, paper="letter"
            )
        return cls()

    @property
    def page_size(self) -> tuple[float, float]:
        """Page width and height in mm."""
        return (self.width, self.height) if self.single else PAPER_MM[self.paper]

    @property
    def per_page(self) -> int:
        """Labels on one page."""
        return 1 if self.single else self.cols * self.rows

    @property
    def qr_size(self) -> float:
        """Side of the QR symbol (with its quiet zone) in mm: the label height less the padding."""
        return min(self.height, self.width / 2) - 2 * PAD_MM

    def position(self, index: int) -> tuple[float, float]:
        """Top-left corner (x, y) in mm of the label at index on its page."""
        if self.single:
            return (0.0, 0.0)
        i = index % self.per_page
        col, row = i % self.cols, i // self.cols
        return (self.left + col * (self.width + self.col_gap), self.top + row * (self.height + self.row_gap))

    def check(self) -> LabelGeometry:
        """The geometry itself, or a UsageError saying what does not fit on the paper."""
        if self.width <= 0 or self.height <= 0:
            raise UsageError(f"--label-size: width and height must be above 0 mm, got {self.width:g}x{self.height:g}")
        if self.height < 12 or self.width < 12:
            raise UsageError(
                f"--label-size: labels must be at least 12 x 12 mm to hold a readable QR symbol, got {self.width:g}x{self.height:g}"
            )
        if self.single:
            return self
        page_w, page_h = PAPER_MM[self.paper]
        right = self.left + self.cols * self.width + (self.cols - 1) * self.col_gap
        bottom = self.top + self.rows * self.height + (self.rows - 1) * self.row_gap
        if right > page_w + 0.01 or bottom > page_h + 0.01:
            raise UsageError(
                f"--label-grid: {self.cols} x {self.rows} labels of {self.width:g} x {self.height:g} mm need "
                f"{right:g} x {bottom:g} mm with these margins and gaps; {self.paper} paper is {page_w:g} x {page_h:g} mm"
            )
        return self


def parse_pair(text: str, option: str) -> tuple[float, float]:
    """'64x34' or '12.5,7' as two numbers; UsageError naming the option otherwise."""
    m = re.fullmatch(r"\s*(\d+(?:\.\d+)?)\s*[x×,]\s*(\d+(?:\.\d+)?)\s*", text)
    if not m:
        raise UsageError(f"{option}: must be two numbers such as 64x34, got {text!r}")
    return float(m.group(1)), float(m.group(2))
