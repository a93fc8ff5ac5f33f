"""The field map: codes in their grid places, blocks and whole plots outlined, split over pages.

Cell sizes are worked out from the longest text a cell holds, so no phrase is ever cut or
wrapped; a grid wider or taller than one page goes on several pages, each with its own row
and column numbers.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Final

from layout.plan import Plan, Unit
from layout.render import BLOCK_COLOURS, TREATMENT_COLOURS, map_cells, page_context, template_env

# A4 less the page padding (12 mm each side, 11 mm top and bottom), the heading, the notes and the key.
_WIDTH_MM: Final = {"portrait": 210 - 24, "landscape": 297 - 24}
_HEIGHT_MM: Final = {"portrait": 297 - 22 - 50, "landscape": 210 - 22 - 50}
FONT_MM: Final = 2.6  # the cell text
CODE_MM: Final = 2.9  # the code, bold monospace
LINE_MM: Final = 3.6  # one line of cell text with its leading
# Advances of DejaVu Sans Bold, the widest face a cell may use, in thousandths of an em, for
# the printable ASCII characters from the space on (read from the font file with Pillow);
# anything else counts as a full em. The browser test lays out every example as a check.
_BOLD_ADVANCE: Final = (
    348, 456, 521, 838, 696, 1002, 872, 306, 457, 457, 523, 838, 380, 415, 380, 365, 696, 696, 696, 696,
    696, 696, 696, 696, 696, 696, 400, 400, 838, 838, 838, 580, 1000, 774, 762, 734, 830, 683, 683, 821,
    837, 372, 372, 775, 637, 995, 837, 850, 733, 850, 770, 720, 682, 812, 774, 1103, 771, 724, 725, 457,
    365, 457, 838, 500, 500, 675, 716, 593, 716, 678, 435, 716, 712, 343, 343, 665, 343, 1042, 712, 687,
    716, 716, 493, 595, 478, 712, 652, 924, 645, 652, 582, 712, 365, 712, 838,
)  # fmt: skip
_MONO_EM: Final = 0.61  # DejaVu Sans Mono, every character
_CHECK_EM: Final = 0.22  # the gap before the check letter
_CELL_PAD_MM: Final = 2.0 + 1.0 + 0.4  # padding, half of the thickest borders on each side, a margin
_BAR_MM: Final = 1.4 + 1.2  # the treatment's colour bar and its gap


@dataclass(frozen=True)
class MapPage:
    """One page of the map: a window of rows and columns of the whole grid."""

    rows: range
    cols: range


def cell_lines(u: Unit, unit_name: str, show_treatments: bool) -> list[str]:
    """The phrases a cell shows under its code, each kept on one line."""
    lines = [f"{unit_name} {u.serial}"]
    if u.block is not None:
        lines.append(f"block {u.block}" + (f", plot {u.whole_plot}" if u.whole_plot is not None else ""))
    if show_treatments:
        lines.append(u.treatment)
    return lines


def cell_size_mm(plan: Plan, cells: list[list[Unit | None]], show_treatments: bool) -> tuple[float, float]:
    """Width and height a cell needs so its longest phrase and its code fit on one line each."""
    units = [u for row in cells for u in row if u is not None]
    name = plan.spec.design.unit_name
    widest = max(
        max((len(u.code) * _MONO_EM + _CHECK_EM) * CODE_MM for u in units),
        max(text_mm(s) for u in units for s in cell_lines(u, name, show_treatments)[:-1] or [""]),
        max(text_mm(cell_lines(u, name, show_treatments)[-1]) + (_BAR_MM if show_treatments else 0) for u in units),
    )
    lines = 1 + max(len(cell_lines(u, name, show_treatments)) for u in units)
    return widest + _CELL_PAD_MM, lines * LINE_MM + 3.0


def text_mm(text: str) -> float:
    """Width of a line of cell text, set bold, never less than the browser needs."""
    em = sum(_BOLD_ADVANCE[ord(c) - 32] if 32 <= ord(c) < 127 else 1000 for c in text) / 1000
    return em * FONT_MM * 1.04


def map_pages(rows: int, cols: int, cell_w: float, cell_h: float, head_w: float = 0) -> tuple[str, list[MapPage]]:
    """The orientation and the page windows: as few pages as the cell size allows, portrait if one fits."""
    options = []
    for orientation in ("portrait", "landscape"):
        per_row = max(1, int((_WIDTH_MM[orientation] - head_w) // cell_w))
        per_col = max(1, int(_HEIGHT_MM[orientation] // cell_h))
        windows = [MapPage(r, c) for r in _even_chunks(rows, per_col) for c in _even_chunks(cols, per_row)]
        options.append((len(windows), orientation, windows))
    _, orientation, windows = min(options, key=lambda o: o[0])  # the fewest pages; portrait on a tie
    return orientation, windows


def _even_chunks(n: int, most: int) -> list[range]:
    """1..n cut into the fewest windows of at most `most`, as even in size as they can be."""
    count = -(-n // most)
    size = -(-n // count)
    return [range(start, min(start + size, n)) for start in range(0, n, size)]


def outlines(cells: list[list[Unit | None]]) -> dict[tuple[int, int], str]:
    """(row, col) → CSS border widths: thick where the block changes, medium where the whole plot does."""
    out = {}
    for i, row in enumerate(cells):
        for j, u in enumerate(row):
            if u is None:
                continue
            sides = []
            for di, dj in ((-1, 0), (0, 1), (1, 0), (0, -1)):  # top, right, bottom, left, as CSS orders them
                ni, nj = i + di, j + dj
                v = cells[ni][nj] if 0 <= ni < len(cells) and 0 <= nj < len(cells[ni]) else None
                if v is None or v.block != u.block:
                    sides.append("1mm")
                elif v.whole_plot != u.whole_plot:
                    sides.append("0.6mm")
                else:
                    sides.append("0.2mm")
            out[(i, j)] = " ".join(sides)
    return out


def render_map(plan: Plan, show_treatments: bool) -> str:
    """map.html (codes, blocks and whole plots outlined) or map-key.html (with treatments, for the lead)."""
    cells, is_grid = map_cells(plan)
    treatments = list(plan.spec.treatments)
    colour = {t: TREATMENT_COLOURS[i % len(TREATMENT_COLOURS)] for i, t in enumerate(treatments)}
    whole = next((f for f in plan.spec.factor if f.whole_plot), None)
    if whole is not None:  # split-plot: colour by the whole-plot level, letter the sub-plot treatment
        colour = {
            t: TREATMENT_COLOURS[whole.levels.index(lv[whole.name]) % len(TREATMENT_COLOURS)]
            for t, lv in plan.spec.treatment_levels()
        }
    grid = plan.spec.layout
    rows_are = (grid.rows_are if grid else None) or "row"
    cols_are = (grid.cols_are if grid else None) or "col"
    n_rows, n_cols = len(cells), max(len(r) for r in cells)
    cell_w, cell_h = cell_size_mm(plan, cells, show_treatments)
    head_w = 0.0
    if is_grid:  # the row and column numbers must fit their boxes too
        cell_w = max(cell_w, text_mm(f"{cols_are} {n_cols}") + 2.4)
        head_w = text_mm(f"{rows_are} {n_rows}") + 2.4
    orientation, pages = map_pages(n_rows, n_cols, cell_w, cell_h, head_w)
    widest = max(len(p.cols) for p in pages)  # spread a small grid over the page, up to 40 mm a cell
    cell_w = max(cell_w, min(40.0, (_WIDTH_MM[orientation] - head_w) / widest - 0.5))
    return (
        template_env()
        .get_template("map.html")
        .render(
            **page_context(plan),
            cells=cells,
            pages=pages,
            cell_w=round(cell_w, 1),
            cell_h=round(cell_h, 1),
            lines=lambda u: cell_lines(u, plan.spec.design.unit_name, show_treatments),
            is_grid=is_grid,
            show_treatments=show_treatments,
            treatment_colour=colour,
            treatments=treatments,
            whole_factor=whole.name if whole else None,
            whole_levels=list(whole.levels) if whole else [],
            whole_colour={lv: TREATMENT_COLOURS[k % len(TREATMENT_COLOURS)] for k, lv in enumerate(whole.levels)}
            if whole
            else {},
            factor_names=" / ".join(f.name for f in plan.spec.factor),
            blocks=sorted({u.block for u in plan.units if u.block is not None}),
            block_colour=lambda b: BLOCK_COLOURS[(b - 1) % len(BLOCK_COLOURS)] if b else "#f4f5f6",
            outlines=outlines(cells) if is_grid else {},
            rows_are=rows_are,
            cols_are=cols_are,
            head_w=round(head_w, 1),
            landmark=grid.landmark if grid else None,
            orientation=orientation,
            walk=grid.walk if grid else None,
        )
    )
