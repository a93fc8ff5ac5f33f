"""What every page shares: the template environment, the stylesheet, colours and the printed form of codes.

Both the sheets (outputs) and the check report (intake) render through this module, so
neither reaches into the other.
"""

from __future__ import annotations

from functools import cache
from importlib import resources
from typing import Final

from jinja2 import Environment, FileSystemLoader, select_autoescape
from markupsafe import Markup, escape

from layout.codes import split_check
from layout.plan import Plan, Unit

BLOCK_COLOURS: Final = ("#d8eedf", "#fbe4c0", "#d6e3f5", "#f5d7e1", "#e4ddf3", "#f0edc4", "#d2ecec", "#ecdcd0")
# Our own set, chosen by a search for the largest smallest difference (CIE76 ΔE over 15 in normal vision and
# in simulated protan, deutan and tritan vision; CIE L* at least 4.5 apart, so greyscale prints keep them
# apart), then ordered so that neighbouring treatments differ most. tests/test_printables.py measures it.
TREATMENT_COLOURS: Final = (
    "#26266c",
    "#e45916",
    "#9615ad",
    "#bcc285",
    "#52304f",
    "#e26ee3",
    "#922ee4",
    "#99df2b",
    "#773733",
    "#c1a851",
    "#c74198",
    "#8ae9e4",
)


def page_context(plan: Plan) -> dict[str, object]:
    """What the head of every page shows: study, design, fingerprint, tool version, and the stylesheet."""
    from layout.meta import __version__

    return {
        "study": plan.spec.study,
        "design": plan.spec.design,
        "fingerprint": plan.fingerprint,
        "short_fp": plan.fingerprint[:12],
        "version": __version__,
        "css": stylesheet("print.css"),
    }


def printed_code(code: str) -> Markup:
    """A code for paper: zeros dotted, the check letter set apart by a margin (never a character).

    The dot is drawn by CSS over the digit (print.css, .zero), so it shows in any font and the
    page's text, when copied, is still the code.
    """
    body, letter = split_check(code)
    shown = str(escape(body)).replace("0", '<span class="zero">0</span>')
    return Markup(f'<span class="code-text">{shown}<span class="check">{escape(letter)}</span></span>')


@cache
def template_env() -> Environment:
    """The jinja2 environment over the packaged templates, autoescaping HTML."""
    folder = str(resources.files("layout.templates"))
    env = Environment(
        loader=FileSystemLoader(folder),
        autoescape=select_autoescape(["html"]),
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters["printed_code"] = printed_code
    return env


def stylesheet(name: str) -> Markup:
    """A packaged CSS file, marked safe for a <style> element."""
    return Markup(resources.files("layout.templates").joinpath(name).read_text(encoding="utf-8"))


def map_cells(plan: Plan) -> tuple[list[list[Unit | None]], bool]:
    """Rows of cells (None for an empty cell), and whether they are a real grid."""
    grid = plan.spec.layout
    if any(u.row is not None for u in plan.units):
        rows = max(u.row or 0 for u in plan.units) if grid is None else grid.rows
        cols = max(u.col or 0 for u in plan.units) if grid is None else grid.cols
        cells: list[list[Unit | None]] = [[None] * cols for _ in range(rows)]
        for u in plan.units:
            cells[(u.row or 1) - 1][(u.col or 1) - 1] = u
        return cells, True
    width = max(len(plan.spec.treatments), 5)
    if width > 10:
        width = 10
    units: list[Unit | None] = list(plan.units)
    return [units[i : i + width] for i in range(0, len(units), width)], False
