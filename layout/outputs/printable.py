"""The printable pages: collection sheets and labels, rendered from templates.

The data each page needs is prepared here; the templates only loop and format.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any, Final

from markupsafe import Markup

from layout.outputs.entry_table import EntryRow, Part, allowed_text, entry_rows
from layout.outputs.labels import PAD_MM, LabelGeometry
from layout.outputs.qr import qr_svgs
from layout.plan import Plan, Unit
from layout.render import page_context, template_env

_SHEET_ROWS: Final = {
    ("a4", "portrait"): 26,
    ("a4", "landscape"): 16,
    ("letter", "portrait"): 24,
    ("letter", "landscape"): 17,
}

Tick = Callable[[], None]


def position_text(u: Unit) -> str:
    """Where a unit is, in words short enough for a label."""
    parts = []
    if u.block is not None:
        parts.append(f"block {u.block}")
    if u.row is not None:
        parts.append(f"row {u.row} col {u.col}")
    return ", ".join(parts)


@dataclass
class SheetPage:
    """One printed collection sheet: one round, one or more blocks, whole units only."""

    round: str
    block: int | None
    rows: list[EntryRow] = field(default_factory=list)
    number: int = 0  # within its round
    of: int = 0
    blocks: list[int] = field(default_factory=list)

    def starts_block(self, i: int) -> bool:
        """Whether row i opens a new block on this page (a block heading goes above it)."""
        return self.rows[i].unit.block is not None and (
            i == 0 or self.rows[i - 1].unit.block != self.rows[i].unit.block
        )


def _by_unit(rows: list[EntryRow]) -> list[list[EntryRow]]:
    groups: list[list[EntryRow]] = []
    for row in rows:
        if groups and groups[-1][0].unit.code == row.unit.code and groups[-1][0].round == row.round:
            groups[-1].append(row)
        else:
            groups.append([row])
    return groups


def treatment_width(plan: Plan) -> float:
    """mm for the treatment column: its longest label at the sheet's 3 mm type (about 1.8 mm a character)."""
    return round(min(45.0, max(19.0, 1.8 * max(len(t) for t in plan.spec.treatments) + 3)), 1)


def sheet_orientation(plan: Plan, paper: str) -> str:
    """Portrait when every response column gets at least 17 mm beside the fixed columns, else landscape."""
    fixed = 27 + 20 + 15 + 20 + 18  # code, unit, subsample, missing reason, note (sheets.html)
    fixed += treatment_width(plan) if not plan.spec.study.blind else 0
    fixed += 13 if any(u.whole_plot is not None for u in plan.units) else 0
    dates = sum(1 for r in plan.spec.response if r.kind == "date")
    others = len(plan.spec.response) - dates
    width = (210.0 if paper == "a4" else 215.9) - 24 - fixed - 27 * dates
    return "portrait" if others == 0 or width / others >= 17 else "landscape"


def sheet_pages(plan: Plan, paper: str, part: Part | None = None) -> tuple[list[SheetPage], str]:
    """Rows cut into pages per round, filled with whole units (a block heading costs a line), and the orientation."""
    orientation = sheet_orientation(plan, paper)
    per_page = _SHEET_ROWS[(paper, orientation)]
    pages: list[SheetPage] = []
    used = 0
    for group in _by_unit(entry_rows(plan, part)):
        first = group[0]
        last = pages[-1] if pages else None
        heading = (
            1 if first.unit.block is not None and (last is None or last.rows[-1].unit.block != first.unit.block) else 0
        )
        if last is None or last.round != first.round or (used + len(group) + heading > per_page and last.rows):
            pages.append(SheetPage(first.round, first.unit.block))
            used = 1 if first.unit.block is not None else 0
        else:
            used += heading
        page = pages[-1]
        page.rows += group
        used += len(group)
        if first.unit.block is not None and first.unit.block not in page.blocks:
            page.blocks.append(first.unit.block)
    for rnd in dict.fromkeys(p.round for p in pages):
        mine = [p for p in pages if p.round == rnd]
        for i, page in enumerate(mine, start=1):
            page.number, page.of = i, len(mine)
    return pages, orientation


def human(name: str) -> str:
    """A spec name as a header on paper: underscores as spaces (sampled_on → sampled on)."""
    return name.replace("_", " ")


def render_sheets(plan: Plan, paper: str = "a4", part: Part | None = None) -> str:
    """sheets.html: collection sheets by round and block, in collection order (all, or one part's)."""
    pages, orientation = sheet_pages(plan, paper, part)
    responses = [
        {"header": human(r.header), "name": r.name, "allowed": allowed_text(r), "date": r.kind == "date"}
        for r in plan.spec.response
    ]
    return (
        template_env()
        .get_template("sheets.html")
        .render(
            **page_context(plan),
            pages=pages,
            total=len(pages),
            responses=responses,
            paper=paper,
            orientation=orientation,
            reasons=plan.spec.collection.missing_reasons,
            show_treatment=not plan.spec.study.blind,
            show_whole_plot=any(u.whole_plot is not None for u in plan.units),
            treatment_width=treatment_width(plan),
            position=position_text,
        )
    )


def _label_pages(items: list[dict[str, Any]], geometry: LabelGeometry) -> list[list[dict[str, Any]]]:
    per = geometry.per_page
    pages = [items[i : i + per] for i in range(0, len(items), per)]
    for page in pages:
        for i, item in enumerate(page):
            item["x"], item["y"] = geometry.position(i)
    return pages


def render_labels(plan: Plan, geometry: LabelGeometry, units: bool = False, tick: Tick | None = None) -> str:
    """labels.html (one per slot) or unit-labels.html (one per unit)."""
    d = plan.spec.design
    blind = plan.spec.study.blind
    items: list[dict[str, Any]] = []
    svg = qr_svgs([u.code for u in plan.units] if units else [s.code for s in plan.slots], geometry.qr_size)
    if units:
        for u in plan.units:
            lines = [f"{d.unit_name} {u.serial}", position_text(u)] + ([] if blind else [u.treatment])
            items.append({"code": u.code, "qr": Markup(svg[u.code]), "lines": [x for x in lines if x]})
            if tick:
                tick()
    else:
        # destructive sampling takes a new sample each round: one label per slot and round
        rounds = [r.name for r in plan.rounds] if plan.spec.collection.labels_per_round else [None]
        for rnd in rounds:
            for s in plan.slots:
                u = plan.unit_by_code[s.unit]
                of = len(plan.slots_of[u.code])
                lines = [f"{d.subsample_name} {s.subsample} of {of}", f"{d.unit_name} {u.code}", position_text(u)]
                lines = ([f"round {rnd}"] if rnd is not None else []) + lines + ([] if blind else [u.treatment])
                items.append({"code": s.code, "qr": Markup(svg[s.code]), "lines": [x for x in lines if x]})
                if tick:
                    tick()
    page_w, page_h = geometry.page_size
    text_w = geometry.width - geometry.qr_size - 3 * PAD_MM
    # the code as large as the label allows: its longest code fits the text column (a mono character is
    # about 0.62 em wide), and the code with its lines fits the label's height
    longest = max((len(i["code"]) for i in items), default=12)
    lines = max((len(i["lines"]) for i in items), default=3)
    top = (geometry.height - geometry.qr_size) / 2 + geometry.qr_size * 0.12  # where the text starts (labels.html)
    room = geometry.height - top - PAD_MM - 0.8
    font = round(min(text_w / (0.62 * longest + 0.6), room / (1.3 + 0.78 * 1.3 * lines), 7.0), 2)
    # the lines below the code: as large as the code allows, but narrow enough for the longest line (sans, ~0.55 em)
    widest = max((len(line) for i in items for line in i["lines"]), default=10)
    line_font = round(max(min(0.78 * font, text_w / (0.55 * widest)), 1.8), 2)
    return (
        template_env()
        .get_template("labels.html")
        .render(
            **page_context(plan),
            pages=_label_pages(items, geometry),
            g=geometry,
            page_w=page_w,
            page_h=page_h,
            pad=PAD_MM,
            text_w=text_w,
            font=font,
            line_font=line_font,
            kind="unit" if units else "slot",
        )
    )
