"""Write the chosen outputs of a plan into a folder, never over an existing file without force."""

from __future__ import annotations

import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from pathlib import Path

from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

from layout.errors import UsageError
from layout.files import refuse_existing, write_new
from layout.meta import PRODUCTS
from layout.outputs.entry_table import Part, parts
from layout.outputs.keyfile import key_csv
from layout.outputs.labels import LabelGeometry
from layout.outputs.maps import render_map
from layout.outputs.pdf import choose_engine, html_to_pdf
from layout.outputs.printable import render_labels, render_sheets
from layout.outputs.workbook import workbook_bytes
from layout.plan import Plan


@dataclass(frozen=True)
class SheetOptions:
    """What to make and how."""

    only: tuple[str, ...] = PRODUCTS
    pdf: bool = False
    paper: str = "a4"
    labels: LabelGeometry = field(default_factory=LabelGeometry)
    pdf_engine: str = "auto"
    force: bool = False
    progress: bool = False
    split: str | None = None  # "round" or "block": one workbook and one set of sheets per part


def _parts(plan: Plan, options: SheetOptions) -> list[Part | None]:
    return list(parts(plan, options.split)) if options.split else [None]


def _suffixes(plan: Plan, options: SheetOptions) -> list[str]:
    return [f"-{p.slug}" if p else "" for p in _parts(plan, options)]


def planned_files(plan: Plan, options: SheetOptions) -> list[str]:
    """The file names the options will write, in writing order."""
    names: list[str] = []
    pdf = options.pdf
    for product in options.only:
        if product == "entry":
            names += [f"entry{sfx}.xlsx" for sfx in _suffixes(plan, options)]
        elif product == "sheets":
            for sfx in _suffixes(plan, options):
                names += [f"sheets{sfx}.html"] + ([f"sheets{sfx}.pdf"] if pdf else [])
        elif product == "labels":
            names += ["labels.html", "unit-labels.html"] + (["labels.pdf", "unit-labels.pdf"] if pdf else [])
        elif product == "map":
            names += ["map.html", "map-key.html"] + (["map.pdf", "map-key.pdf"] if pdf else [])
        elif product == "key":
            names.append("key.csv")
    return names


class _Bar:
    """A rich progress bar on stderr, or nothing."""

    def __init__(self, on: bool) -> None:
        self.progress = (
            Progress(
                TextColumn("{task.description}"),
                BarColumn(),
                MofNCompleteColumn(),
                TimeElapsedColumn(),
                console=Console(stderr=True),
                transient=True,
            )
            if on
            else None
        )

    @contextmanager
    def task(self, name: str, total: int) -> Iterator[Callable[[], None]]:
        if self.progress is None:
            yield lambda: None
            return
        task = self.progress.add_task(name, total=total)
        yield lambda: self.progress.advance(task) if self.progress else None
        self.progress.remove_task(task)


def write_sheets(plan: Plan, out_dir: str | Path, options: SheetOptions | None = None) -> list[Path]:
    """Make the chosen outputs in out_dir; returns the paths written."""
    options = options or SheetOptions()
    unknown = [p for p in options.only if p not in PRODUCTS]
    if unknown:
        raise UsageError(f"--only: {unknown[0]!r} is not one of {', '.join(PRODUCTS)}")
    if options.split not in (None, "round", "block"):
        raise UsageError(f"--split: must be round or block, got {options.split!r}")
    if options.split == "block" and all(u.block is None for u in plan.units):
        raise UsageError(f"--split block: a {plan.spec.design.type} has no blocks; use --split round")
    if options.paper not in ("a4", "letter"):
        raise UsageError(f"--paper: must be a4 or letter, got {options.paper!r}")
    if options.labels == LabelGeometry() and options.paper != "a4":
        options = replace(options, labels=LabelGeometry.for_paper(options.paper))
    options.labels.check()
    folder = Path(out_dir)
    names = planned_files(plan, options)
    for name in names:  # refuse before writing anything, so a run is all or nothing
        refuse_existing(folder / name, options.force)
    engine = choose_engine(options.pdf_engine) if options.pdf else ""
    written: list[Path] = []
    bar = _Bar(options.progress)

    def put(name: str, data: bytes | str) -> Path:
        path = write_new(folder / name, data, force=options.force)
        written.append(path)
        return path

    def pdf_of(html_name: str, html: str) -> None:
        with tempfile.TemporaryDirectory(prefix="layout-") as tmp:
            source = Path(tmp) / html_name
            source.write_text(html, encoding="utf-8")
            with bar.task(f"PDF {html_name.replace('.html', '.pdf')}", 1) as tick:
                put(html_name.replace(".html", ".pdf"), html_to_pdf(source, engine))
                tick()

    with bar.progress or _null():
        for product in options.only:
            if product == "entry":
                parts_ = _parts(plan, options)
                with bar.task("entry workbook", len(parts_)) as tick:  # seconds at 100,000 slots
                    for part in parts_:
                        put(f"entry{'-' + part.slug if part else ''}.xlsx", workbook_bytes(plan, part))
                        tick()
            elif product == "sheets":
                for part in _parts(plan, options):
                    name = f"sheets{'-' + part.slug if part else ''}.html"
                    with bar.task(f"collection sheets {name}", 1) as tick:
                        html = render_sheets(plan, options.paper, part)
                        tick()
                    put(name, html)
                    if options.pdf:
                        pdf_of(name, html)
            elif product == "labels":
                geometry = LabelGeometry(**{**options.labels.__dict__, "paper": options.paper})
                pages = []
                with bar.task("slot labels", len(plan.slots)) as tick:
                    pages.append(("labels.html", render_labels(plan, geometry, units=False, tick=tick)))
                with bar.task("unit labels", len(plan.units)) as tick:
                    pages.append(("unit-labels.html", render_labels(plan, geometry, units=True, tick=tick)))
                for name, html in pages:
                    put(name, html)
                if options.pdf:
                    for name, html in pages:
                        pdf_of(name, html)
            elif product == "map":
                # collectors get the map without treatments in every study; the lead gets map-key
                for name, show in (("map.html", False), ("map-key.html", True)):
                    html = render_map(plan, show_treatments=show)
                    put(name, html)
                    if options.pdf:
                        pdf_of(name, html)
            elif product == "key":
                put("key.csv", key_csv(plan))
    return written


@contextmanager
def _null() -> Iterator[None]:
    yield
