"""Sheets, labels and map checked by outside readers: zxing-cpp, pdftoppm, pypdf and headless Chromium."""

from __future__ import annotations

import re
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pytest
import zxingcpp
from hypothesis import given, settings
from hypothesis import strategies as st
from PIL import Image
from pypdf import PdfReader

from layout import Plan
from layout.outputs import SheetOptions, write_sheets
from layout.outputs.labels import LabelGeometry
from layout.outputs.maps import render_map
from layout.outputs.pdf import html_to_pdf
from layout.outputs.printable import render_labels, render_sheets, sheet_pages

DPI = 200
MM_PER_PX = 25.4 / DPI
CHROMIUM_FLAGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


def rasterize(pdf: Path, pdftoppm: str, out: Path) -> list[Path]:
    """Every page of pdf as a PNG at 200 dpi, by poppler's pdftoppm."""
    subprocess.run([pdftoppm, "-r", str(DPI), "-png", str(pdf), str(out / "page")], check=True, timeout=300)
    return sorted(out.glob("page-*.png"), key=lambda p: int(re.findall(r"\d+", p.stem)[-1]))


def decode(png: Path) -> list[tuple[str, float, float]]:
    """(text, centre x mm, centre y mm) of every QR symbol zxing-cpp finds on a page."""
    found = []
    for r in zxingcpp.read_barcodes(Image.open(png), formats=zxingcpp.BarcodeFormat.QRCode):
        p = r.position
        xs = [p.top_left.x, p.top_right.x, p.bottom_left.x, p.bottom_right.x]
        ys = [p.top_left.y, p.top_right.y, p.bottom_left.y, p.bottom_right.y]
        found.append((r.text, sum(xs) / 4 * MM_PER_PX, sum(ys) / 4 * MM_PER_PX))
    return found


def pdf_of(html: str, engine: str, tmp: Path, name: str) -> Path:
    source = tmp / f"{name}.html"
    source.write_text(html, encoding="utf-8")
    target = tmp / f"{name}.pdf"
    target.write_bytes(html_to_pdf(source, engine))
    return target


@pytest.fixture(params=["weasyprint", "chromium"])
def engine(request: pytest.FixtureRequest) -> str:
    if request.param == "chromium":
        return request.getfixturevalue("chromium")
    return "weasyprint"


STOCK = {
    "64x34": LabelGeometry(),
    "99x38": LabelGeometry(cols=2, rows=7, width=99, height=38, top=15, left=5, col_gap=2, row_gap=0),
}


class TestLabels:
    @pytest.mark.parametrize("stock", list(STOCK))
    @pytest.mark.parametrize("units", [False, True], ids=["slot-labels", "unit-labels"])
    def test_every_code_decodes_once_at_its_place(
        self, units: bool, stock: str, crd_plan: Plan, engine: str, pdftoppm: str, tmp_path: Path
    ) -> None:
        """Rasterized at 200 dpi, zxing-cpp reads exactly the planned codes, one symbol each, within 0.5 mm of the geometry."""
        g = STOCK[stock]
        pdf = pdf_of(render_labels(crd_plan, g, units=units), engine, tmp_path, "labels")
        codes = [u.code for u in crd_plan.units] if units else [s.code for s in crd_plan.slots]
        pages = rasterize(pdf, pdftoppm, tmp_path)
        assert len(pages) == -(-len(codes) // g.per_page)
        seen: list[str] = []
        for page_no, png in enumerate(pages):
            for text, cx, cy in decode(png):
                index = codes.index(text)
                assert index // g.per_page == page_no
                x, y = g.position(index)
                assert abs(cx - (x + 1.5 + g.qr_size / 2)) < 0.5, (text, cx)
                assert abs(cy - (y + g.height / 2)) < 0.5, (text, cy)
                seen.append(text)
        assert sorted(seen) == sorted(codes)

    def test_symbol_and_code_scale_with_the_label(self, crd_plan: Plan) -> None:
        """On larger stock the QR symbol takes the label's height and the printed code grows with it."""
        import re as _re

        sizes = {}
        for name, g in STOCK.items():
            html = render_labels(crd_plan, g)
            sizes[name] = float(_re.search(r"\.label \.code \{ font-size: ([0-9.]+)mm", html).group(1))
            assert g.qr_size == pytest.approx(min(g.height, g.width / 2) - 3.0)  # as high as the label allows
        assert sizes["99x38"] > sizes["64x34"] * 1.1

    def test_label_printer_one_per_page(self, crd_plan: Plan, engine: str, pdftoppm: str, tmp_path: Path) -> None:
        """With single labels of 50 x 25 mm each page is one label of that size holding its unit's code."""
        g = LabelGeometry(width=50, height=25, single=True)
        pdf = pdf_of(render_labels(crd_plan, g, units=True), engine, tmp_path, "single")
        reader = PdfReader(pdf)
        assert len(reader.pages) == len(crd_plan.units)
        box = reader.pages[0].mediabox
        assert abs(float(box.width) / 72 * 25.4 - 50) < 0.5 and abs(float(box.height) / 72 * 25.4 - 25) < 0.5
        pages = rasterize(pdf, pdftoppm, tmp_path)
        assert [[t for t, _, _ in decode(p)] for p in pages] == [[u.code] for u in crd_plan.units]


class TestSheets:
    def test_pdf_text_holds_every_slot_code(self, rcbd_plan: Plan, engine: str, tmp_path: Path) -> None:
        """pypdf finds every slot code in sheets.pdf, and one page per planned sheet page."""
        pdf = pdf_of(render_sheets(rcbd_plan), engine, tmp_path, "sheets")
        reader = PdfReader(pdf)
        pages, _ = sheet_pages(rcbd_plan, "a4")
        assert len(reader.pages) == len(pages)
        text = "\n".join(p.extract_text() for p in reader.pages)
        # the check letter is set apart on paper; a text extractor may read that gap as a space
        joined = re.sub(r"(?<=\d) (?=[A-Z]\b)", "", text)
        missing = [s.code for s in rcbd_plan.slots if s.code not in joined]
        assert missing == []
        last = pages[-1]
        assert f"page {last.number} of {last.of}" in text

    def test_pages_by_round_filled_with_whole_units(self, rcbd_plan: Plan) -> None:
        """Every page holds one round; no unit's subsamples are split over two pages; pages are filled (each but a
        round's last could not take the next unit); pages are numbered within their round."""
        pages, orientation = sheet_pages(rcbd_plan, "a4")
        per_page = 26 if orientation == "portrait" else 16
        seen: dict[tuple[str, str], int] = {}
        for i, page in enumerate(pages):
            assert {r.round for r in page.rows} == {page.round}
            for r in page.rows:
                assert seen.setdefault((r.round, r.unit.code), i) == i
            if i + 1 < len(pages) and pages[i + 1].round == page.round:
                lines = len(page.rows) + sum(page.starts_block(k) for k in range(len(page.rows)))
                assert lines + 4 + 1 > per_page  # the next unit (4 cores) and its heading would not fit
        for rnd in {p.round for p in pages}:
            mine = [p for p in pages if p.round == rnd]
            assert [(p.number, p.of) for p in mine] == [(k, len(mine)) for k in range(1, len(mine) + 1)]
        assert len(pages) < 8  # 2 rounds × 4 blocks of 16 rows, before: one half-empty page per block

    @pytest.mark.parametrize("paper", ["a4", "letter"])
    def test_paper_size(self, rcbd_plan: Plan, paper: str, tmp_path: Path) -> None:
        """--paper sets the PDF page size (A4 210 × 297 mm, letter 215.9 × 279.4 mm)."""
        pdf = pdf_of(render_sheets(rcbd_plan, paper), "weasyprint", tmp_path, "sheets")
        box = PdfReader(pdf).pages[0].mediabox
        size = sorted((round(float(box.width) / 72 * 25.4, 1), round(float(box.height) / 72 * 25.4, 1)))
        assert size == ([210.0, 297.0] if paper == "a4" else [215.9, 279.4])


class TestBlind:
    def test_no_treatment_in_collector_outputs(self, blind_plan: Plan, chromium: str, tmp_path: Path) -> None:
        """For a blind study no treatment label is in entry.xlsx (any sheet), the sheets, labels or map, HTML or PDF."""
        import openpyxl

        written = write_sheets(blind_plan, tmp_path, SheetOptions(pdf=True, pdf_engine=chromium))
        names = {p.name for p in written}
        assert {"key.csv", "map-key.html"} <= names
        collector = [p for p in written if p.name not in ("key.csv", "map-key.html", "map-key.pdf")]
        treatments = blind_plan.spec.treatments
        for path in collector:
            if path.suffix == ".xlsx":
                wb = openpyxl.load_workbook(path)
                text = " ".join(str(c) for ws in wb.worksheets for row in ws.iter_rows(values_only=True) for c in row)
            elif path.suffix == ".pdf":
                text = " ".join(p.extract_text() for p in PdfReader(path).pages)
            else:
                text = path.read_text(encoding="utf-8")
            leaked = [t for t in treatments if t in text]
            assert leaked == [], path.name
        key = (tmp_path / "key.csv").read_text()
        assert all(t in key for t in treatments)


MEASURE = """<script>
window.addEventListener('load', () => {
  const bad = [];
  document.querySelectorAll('table').forEach(t => {
    const page = t.closest('.page').getBoundingClientRect();
    const box = t.getBoundingClientRect();
    if (box.right > page.right + 0.5 || t.scrollWidth > t.clientWidth + 1) bad.push(Math.round(box.right - page.right));
  });
  document.body.setAttribute('data-overflow', bad.length ? bad.join(',') : 'none');
});
</script>"""


class TestInBrowser:
    @pytest.mark.parametrize("page", ["sheets", "map", "map-key"])
    @pytest.mark.parametrize("plan_name", ["crd_plan", "rcbd_plan", "blind_plan"])
    def test_no_table_wider_than_page(
        self, page: str, plan_name: str, chromium: str, request: pytest.FixtureRequest, tmp_path: Path
    ) -> None:
        """Headless Chromium lays out every table inside its page."""
        plan = request.getfixturevalue(plan_name)
        html = render_sheets(plan) if page == "sheets" else render_map(plan, show_treatments=page == "map-key")
        source = tmp_path / "page.html"
        source.write_text(html.replace("</body>", MEASURE + "</body>"), encoding="utf-8")
        with tempfile.TemporaryDirectory() as profile:
            dom = subprocess.run(
                [
                    chromium,
                    *CHROMIUM_FLAGS,
                    f"--user-data-dir={profile}",
                    "--virtual-time-budget=5000",
                    "--dump-dom",
                    source.as_uri(),
                ],
                capture_output=True,
                text=True,
                timeout=120,
            ).stdout
        assert 'data-overflow="none"' in dom, re.findall(r'data-overflow="[^"]*"', dom)


class TestUnequalSubsamples:
    """A table of subsamples per treatment and a label per round, carried through sheets, labels and check."""

    def test_labels_rows_and_check(self, tmp_path: Path) -> None:
        """Each unit gets its own number of slots on labels (one per round) and in the workbook; check expects them."""
        from layout import load_spec, make_plan
        from layout.intake.check import check_returns
        from layout.intake.findings import Kind
        from layout.outputs.labels import LabelGeometry
        from layout.outputs.printable import render_labels
        from layout.outputs.workbook import workbook_bytes

        plan = make_plan(load_spec(Path(__file__).parent / "specs" / "valid" / "grain-unequal-subsamples.toml"))
        per = {"no liner": 2, "foil liner": 3, "woven liner": 3}
        assert {len(plan.slots_of[u.code]) for u in plan.units if u.treatment == "no liner"} == {2}
        assert len(plan.slots) == 3 * sum(per.values())
        html = render_labels(plan, LabelGeometry())
        assert html.count('class="label"') == len(plan.slots) * 2
        for u in plan.units:
            assert f"probe {per[u.treatment]} of {per[u.treatment]}" in html
        assert "round week2" in html and "round week6" in html
        path = tmp_path / "entry.xlsx"
        path.write_bytes(workbook_bytes(plan))
        result = check_returns(plan, [path])
        kinds = {f.kind for f in result.findings}
        assert kinds == {Kind.MISSING_VALUE}
        assert sum(f.kind is Kind.MISSING_VALUE for f in result.findings) == len(plan.slots) * 2


class TestMaps:
    def test_every_study_gets_both_maps_and_pdfs(self, rcbd_plan: Plan, tmp_path: Path, chromium: str) -> None:
        """A study that is not blind still gets a collectors' map without treatments, and --pdf makes both PDFs."""
        written = {
            p.name
            for p in write_sheets(rcbd_plan, tmp_path, SheetOptions(only=("map",), pdf=True, pdf_engine=chromium))
        }
        assert written == {"map.html", "map-key.html", "map.pdf", "map-key.pdf"}
        collectors = (tmp_path / "map.html").read_text(encoding="utf-8")
        assert not any(f">{t}<" in collectors for t in rcbd_plan.spec.treatments)
        assert all(
            f">{t}<" in (tmp_path / "map-key.html").read_text(encoding="utf-8") for t in rcbd_plan.spec.treatments
        )

    def test_axis_names_landmark_and_block_outlines(self) -> None:
        """rows_are, cols_are and landmark from the spec are printed; cells on a block's edge get a thick border."""
        from layout import loads_spec, make_plan
        from layout.outputs.maps import outlines as _outlines
        from layout.render import map_cells

        spec = loads_spec(
            '[study]\nid = "MP1"\ntitle = "m"\nseed = 1\n[design]\ntype = "rcbd"\nblocks = 2\ntreatments = ["a", "b", "c", "d"]\n'
            '[layout]\nrows = 2\ncols = 4\nrows_are = "bench"\ncols_are = "position"\nlandmark = "door at bench 1"\n'
            '[[response]]\nname = "y"\nkind = "number"\n',
            "m.toml",
        )
        plan = make_plan(spec)
        html = render_map(plan, show_treatments=False)
        assert "bench 2" in html and "position 4" in html and "door at bench 1" in html
        cells, _ = map_cells(plan)
        lines = _outlines(cells)
        # blocks are the two bench rows: the top cells' bottom edge borders the other block
        assert all(lines[(0, j)].split()[2] == "1mm" for j in range(4))
        assert all(lines[(0, j)].split()[1] == "0.2mm" for j in range(3))


def _lab(rgb_hex: str, matrix: object = None) -> np.ndarray:
    """CIE L*a*b* (D65) of an sRGB colour, optionally as seen through a colour-vision-deficiency matrix."""
    c = np.array([int(rgb_hex[i : i + 2], 16) / 255 for i in (1, 3, 5)])
    lin = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    if matrix is not None:
        lin = np.clip(np.asarray(matrix) @ lin, 0, 1)
    xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]) @ lin
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > 0.008856, np.cbrt(t), 7.787 * t + 16 / 116)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


# Machado, Oliveira & Fernandes (2009), IEEE TVCG 15(6): 1291-1298, severity 1.0 (values from memory)
_CVD = {
    "protan": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]],
    "deutan": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]],
    "tritan": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]],
}


class TestColours:
    def test_treatment_colours_stay_apart(self) -> None:
        """Every pair of treatment colours differs by CIE76 ΔE ≥ 15 in normal vision and in simulated protan, deutan and
        tritan vision, and by L* ≥ 4.5 in greyscale (CIE L*a*b*, sRGB D65; ΔE ≈ 2.3 is a just-noticeable difference)."""
        from itertools import combinations

        from layout.render import TREATMENT_COLOURS

        assert len(set(TREATMENT_COLOURS)) == len(TREATMENT_COLOURS) == 12
        for a, b in combinations(TREATMENT_COLOURS, 2):
            assert abs(_lab(a)[0] - _lab(b)[0]) >= 4.5, (a, b)
            for matrix in (None, *_CVD.values()):
                assert np.linalg.norm(_lab(a, matrix) - _lab(b, matrix)) >= 15, (a, b, matrix)


class TestBatchSymbols:
    """layout.outputs.qrbatch against the qrcode library, the outside reference: the same modules,
    mask included, for every code of every example and for random alphanumeric texts."""

    def test_every_example_code_equals_the_library(self) -> None:
        from layout import load_spec, make_plan
        from layout.outputs.qr import qr_matrix
        from layout.outputs.qrbatch import fits, symbols

        codes = []
        for spec in sorted((Path(__file__).parent.parent / "examples").glob("*.toml")):
            plan = make_plan(load_spec(spec))
            codes += [s.code for s in plan.slots] + [u.code for u in plan.units]
        assert all(fits(c) for c in codes)
        for code, got in zip(codes, symbols(codes), strict=True):
            assert got.tolist() == [list(r) for r in qr_matrix(code)], code

    @settings(max_examples=200, deadline=None)
    @given(
        st.lists(
            st.text(alphabet="0123456789ABCDEFGHIJKLMNOPQRSTUVWXYZ $%*+-./:", max_size=20), min_size=1, max_size=20
        )
    )
    def test_random_texts_equal_the_library(self, texts: list[str]) -> None:
        from layout.outputs.qr import qr_matrix
        from layout.outputs.qrbatch import symbols

        for text, got in zip(texts, symbols(texts), strict=True):
            assert got.tolist() == [list(r) for r in qr_matrix(text)], text

    def test_longer_texts_fall_back_to_the_library(self) -> None:
        from layout.outputs.qr import qr_svg, qr_svgs

        long = "A-VERY-LONG-STUDY-ID-0001-1X"
        assert qr_svgs([long], 20.0)[long] == qr_svg(long, 20.0)
