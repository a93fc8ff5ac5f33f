"""Every output of every example, laid out by a real browser and rasterized by poppler.

Headless Chromium lays each page out; a small script reports each table cell, code and label
line whose content is wider than the box it has (scrollWidth above clientWidth). The PDFs
are rasterized to PNG by pdftoppm and read back: every QR symbol by zxing-cpp, every page's
text by pypdf.
"""

from __future__ import annotations

import json
import re
import subprocess
from pathlib import Path

import pytest
import zxingcpp
from PIL import Image
from pypdf import PdfReader

from layout import SheetOptions, load_spec, make_plan, write_sheets
from layout.outputs.pdf import CHROMIUM_FLAGS

EXAMPLES = sorted((Path(__file__).parent.parent / "examples").glob("*.toml"))
PROBE = """<script>
document.addEventListener('DOMContentLoaded', () => {
  const bad = [];
  for (const el of document.querySelectorAll('td, th, td div, .code, .line, .sub, h1')) {
    if (el.scrollWidth > el.clientWidth + 1) bad.push(el.textContent.trim().slice(0, 40));
  }
  const out = document.createElement('pre'); out.id = 'overflow'; out.textContent = JSON.stringify(bad);
  document.body.appendChild(out);
});
</script>"""


def rasterize(pdf: Path, pdftoppm: str, out: Path, dpi: int) -> list[Path]:
    """Every page of pdf as a PNG, by poppler's pdftoppm."""
    out.mkdir(parents=True, exist_ok=True)
    subprocess.run([pdftoppm, "-r", str(dpi), "-png", str(pdf), str(out / "page")], check=True, timeout=300)
    return sorted(out.glob("page-*.png"), key=lambda p: int(re.findall(r"\d+", p.stem)[-1]))


def overflowing(chromium: str, page: Path, profile: Path) -> list[str]:
    probe = page.with_name(page.stem + ".probe.html")
    probe.write_text(page.read_text(encoding="utf-8").replace("</head>", PROBE + "</head>"), encoding="utf-8")
    dom = subprocess.run(
        [chromium, *CHROMIUM_FLAGS, "--no-sandbox", f"--user-data-dir={profile}", "--dump-dom", probe.as_uri()],
        capture_output=True,
        text=True,
        timeout=120,
    ).stdout
    found = re.search(r'<pre id="overflow">([^<]*)</pre>', dom)
    assert found, f"the probe did not run in {page.name}"
    return json.loads(found.group(1).replace("&quot;", '"').replace("&amp;", "&"))


@pytest.mark.parametrize("example", EXAMPLES, ids=lambda p: p.stem)
def test_no_text_overflows_its_box(example: Path, chromium: str, tmp_path: Path) -> None:
    """Sheets, labels and both maps of each example lay out in Chromium with every text inside its box."""
    plan = make_plan(load_spec(example))
    written = write_sheets(plan, tmp_path, SheetOptions(only=("sheets", "labels", "map")))
    pages = [p for p in written if p.suffix == ".html"]
    assert len(pages) == 5
    for page in pages:
        assert overflowing(chromium, page, tmp_path / "profile") == [], page.name


GRIDS = sorted((Path(__file__).parent / "specs" / "grids").glob("*.toml"))


def pages_in(html: Path) -> int:
    return html.read_text(encoding="utf-8").count('<section class="page')


def page_texts(pdf: Path) -> list[str]:
    """Each page's text; the gap before a printed code's check letter may come out as a space."""
    return [re.sub(r"(?<=\d) (?=[A-Z]\b)", "", p.extract_text()) for p in PdfReader(pdf).pages]


@pytest.mark.parametrize("spec", GRIDS, ids=lambda p: p.stem)
def test_large_grid_maps_page_with_their_numbers(spec: Path, chromium: str, pdftoppm: str, tmp_path: Path) -> None:
    """Grids of 12 x 12 and more: no phrase cut or wrapped, each unit once, its row and column named on its page."""
    plan = make_plan(load_spec(spec))
    written = write_sheets(plan, tmp_path, SheetOptions(only=("map",), pdf=True, pdf_engine=chromium))
    grid = plan.spec.layout
    assert grid is not None and grid.rows_are and grid.cols_are
    for name in ("map", "map-key"):
        html = tmp_path / f"{name}.html"
        assert overflowing(chromium, html, tmp_path / "profile") == [], name
        texts = page_texts(tmp_path / f"{name}.pdf")
        assert len(texts) == pages_in(html), f"{name}: a page spilled over"  # no sheet grew past its paper
        for u in plan.units:
            on = [i for i, t in enumerate(texts) if re.search(rf"\b{re.escape(u.code)}\b", t)]
            assert len(on) == 1, (name, u.code, on)
            page = texts[on[0]]
            assert f"{grid.rows_are} {u.row}\n" in page or f"{grid.rows_are} {u.row} " in page, (name, u.code)
            assert f"{grid.cols_are} {u.col}" in page, (name, u.code)
    if plan.spec.layout.rows > 12:
        assert pages_in(tmp_path / "map.html") > 1
    assert len(rasterize(tmp_path / "map.pdf", pdftoppm, tmp_path / "png", dpi=60)) == pages_in(tmp_path / "map.html")
    assert {p.name for p in written} >= {"map.pdf", "map-key.pdf"}


@pytest.mark.parametrize("example", EXAMPLES, ids=lambda p: p.stem)
def test_every_output_rendered_and_read_back(example: Path, chromium: str, pdftoppm: str, tmp_path: Path) -> None:
    """Each PDF as many pages as its HTML, PNG pages that are not blank, every label's QR decoding
    to its code, and each sheet page holding every subsample of each unit it starts."""
    plan = make_plan(load_spec(example))
    write_sheets(plan, tmp_path, SheetOptions(pdf=True, pdf_engine=chromium))
    for pdf in sorted(tmp_path.glob("*.pdf")):
        html = pdf.with_suffix(".html")
        assert len(PdfReader(pdf).pages) == pages_in(html), f"{pdf.name}: a page spilled over"
        pngs = rasterize(pdf, pdftoppm, tmp_path / pdf.stem, dpi=200 if "labels" in pdf.stem else 60)
        assert len(pngs) == pages_in(html)
        for png in pngs:
            assert Image.open(png).convert("L").getextrema()[0] < 128, f"{png} is blank"
        if "labels" in pdf.stem:
            copies = len(plan.rounds) if plan.spec.collection.labels_per_round else 1
            codes = [u.code for u in plan.units] if pdf.stem == "unit-labels" else [s.code for s in plan.slots] * copies
            expected = sorted(codes)
            read = sorted(r.text for png in pngs for r in zxingcpp.read_barcodes(Image.open(png)))
            assert read == expected, pdf.name  # zxing-cpp, an outside reader, finds each code once
    unit_of = {s.code: s.unit for s in plan.slots}
    slots_of: dict[str, set[str]] = {}
    for s in plan.slots:
        slots_of.setdefault(s.unit, set()).add(s.code)
    texts = page_texts(tmp_path / "sheets.pdf")
    assert set().union(*(t.split() for t in texts)) >= set(unit_of)  # every slot is printed
    for number, text in enumerate(texts, 1):
        on_page = set(text.split()) & set(unit_of)
        for unit in {unit_of[c] for c in on_page}:
            assert slots_of[unit] <= on_page, f"sheets.pdf page {number}: unit {unit} split"


def test_demo_report_and_analysis_pages(chromium: str, tmp_path: Path) -> None:
    """The check report (with its findings) and the analysis page lay out with no text out of its box,
    and a screenshot of each is drawn."""
    from layout.demo import run_demo

    run_demo(tmp_path / "demo")
    pages = sorted((tmp_path / "demo").rglob("*.html"))
    assert {p.name for p in pages} >= {"report.html", "analysis.html"}
    for page in pages:
        if page.name in ("report.html", "analysis.html"):
            assert overflowing(chromium, page, tmp_path / "profile") == [], page
            shot = tmp_path / f"{page.parent.name}-{page.stem}.png"
            subprocess.run(
                [chromium, *CHROMIUM_FLAGS, "--no-sandbox", f"--user-data-dir={tmp_path / 'profile'}",
                 "--window-size=1000,1400", f"--screenshot={shot}", page.as_uri()],
                capture_output=True, timeout=120, check=True,
            )  # fmt: skip
            assert Image.open(shot).convert("L").getextrema()[0] < 128, shot
