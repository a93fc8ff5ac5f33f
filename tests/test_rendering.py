"""Every page of every example, laid out by a real browser: no text runs out of its box.

Headless Chromium lays the page out; a small script reports each table cell, code and label
line whose content is wider than the box it has (scrollWidth above clientWidth).
"""

from __future__ import annotations

import json
import re
import subprocess
from pathlib import Path

import pytest

from layout import SheetOptions, load_spec, make_plan, write_sheets
from layout.outputs.pdf import CHROMIUM_FLAGS

EXAMPLES = sorted((Path(__file__).parent.parent / "examples").glob("*.toml"))
PROBE = """<script>
document.addEventListener('DOMContentLoaded', () => {
  const bad = [];
  for (const el of document.querySelectorAll('td, th, .code, .line, .sub, h1')) {
    if (el.scrollWidth > el.clientWidth + 1) bad.push(el.textContent.trim().slice(0, 40));
  }
  const out = document.createElement('pre'); out.id = 'overflow'; out.textContent = JSON.stringify(bad);
  document.body.appendChild(out);
});
</script>"""


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
