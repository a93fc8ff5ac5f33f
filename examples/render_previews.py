"""Render PNG previews of the demo's sheet, labels and map into examples/previews/.

Needs poppler's pdftoppm and a Chromium browser:  python examples/render_previews.py
"""

from __future__ import annotations

import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from layout.demo import run_demo
from layout.outputs.pdf import CHROMIUM_FLAGS

HERE = Path(__file__).parent / "previews"
FLAGS = [*CHROMIUM_FLAGS, "--hide-scrollbars"]


def main() -> int:
    browser = shutil.which("chromium") or shutil.which("google-chrome")
    if not browser or not shutil.which("pdftoppm"):
        print("needs chromium and pdftoppm", file=sys.stderr)
        return 2
    HERE.mkdir(exist_ok=True)
    with tempfile.TemporaryDirectory() as tmp:
        demo = Path(tmp) / "demo"
        run_demo(demo)
        for name in ("sheets", "labels"):
            subprocess.run(
                [
                    "pdftoppm",
                    "-r",
                    "70",
                    "-png",
                    "-f",
                    "1",
                    "-l",
                    "1",
                    "-singlefile",
                    str(demo / f"{name}.pdf"),
                    str(HERE / f"{name}-page1"),
                ],
                check=True,
            )
        for name in ("map", "map-key"):
            subprocess.run(
                [
                    browser,
                    *FLAGS,
                    "--no-sandbox",
                    f"--user-data-dir={tmp}/profile",
                    "--window-size=1000,620",
                    f"--screenshot={HERE / (name + '.png')}",
                    (demo / f"{name}.html").as_uri(),
                ],
                check=True,
                capture_output=True,
            )
    for png in sorted(HERE.glob("*.png")):
        print(png)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
