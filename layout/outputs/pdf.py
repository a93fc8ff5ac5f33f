"""HTML to PDF, through WeasyPrint or a Chromium-family browser; both follow the pages' @page CSS."""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from pathlib import Path
from typing import Final

from layout.errors import UsageError

BROWSERS: Final = ("chromium", "chromium-browser", "google-chrome", "google-chrome-stable", "chrome", "microsoft-edge")
CHROMIUM_FLAGS: Final = (
    "--headless",
    "--disable-gpu",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-pdf-header-footer",
)


def find_browser() -> str | None:
    """The first Chromium-family browser on PATH, or None."""
    for name in BROWSERS:
        found = shutil.which(name)
        if found:
            return found
    return None


def _has_weasyprint() -> bool:
    try:
        import weasyprint  # noqa: F401
    except (ImportError, OSError):  # OSError: the package is there but its system libraries are not
        return False
    return True


def choose_engine(requested: str) -> str:
    """'weasyprint' or a browser path, for 'auto', 'weasyprint', 'chromium' or a browser's path."""
    if requested == "weasyprint":
        if not _has_weasyprint():
            raise UsageError("--pdf-engine weasyprint: WeasyPrint is not installed; pip install 'layout[pdf]'")
        return "weasyprint"
    if requested in ("auto", "chromium"):
        browser = find_browser()
        if browser:
            return browser
        if requested == "auto" and _has_weasyprint():
            return "weasyprint"
        raise UsageError(
            "--pdf: no PDF engine found; install WeasyPrint (pip install 'layout[pdf]') or a Chromium browser, "
            "or name one with --pdf-engine PATH"
        )
    path = shutil.which(requested) or (requested if Path(requested).is_file() else None)
    if not path:
        raise UsageError(f"--pdf-engine: {requested!r} is not auto, weasyprint, chromium or the path of a browser")
    return path


# Chromium turns the CSS-gradient dot of every printed zero into a shading of its own: a sheet of 2,000
# labels came out three times the size and 40% slower. One small SVG image is kept once. (WeasyPrint
# keeps the gradient: with an image behind them it writes the zeros out of the text's reading order.)
CHROMIUM_DOT: Final = (
    "<style>.zero { background: url(\"data:image/svg+xml,%3Csvg xmlns='http://www.w3.org/2000/svg' "
    "viewBox='0 0 10 10'%3E%3Ccircle cx='5' cy='5' r='5' fill='%23111'/%3E%3C/svg%3E\") "
    "no-repeat 50% 56% / 0.15em 0.15em; }</style>"
)


def html_to_pdf(html: Path, engine: str) -> bytes:
    """The PDF of an HTML file made by engine (from choose_engine)."""
    if engine == "weasyprint":
        import weasyprint

        return weasyprint.HTML(filename=str(html)).write_pdf()
    with tempfile.TemporaryDirectory(prefix="layout-pdf-") as tmp:
        target = Path(tmp) / "out.pdf"
        page = Path(tmp) / html.name  # beside nothing else: the pages carry their CSS and images inline
        page.write_text(
            html.read_text(encoding="utf-8").replace("</head>", CHROMIUM_DOT + "</head>", 1), encoding="utf-8"
        )
        html = page
        cmd = [
            engine,
            *CHROMIUM_FLAGS,
            "--no-pdf-header-footer",
            f"--user-data-dir={tmp}/profile",
            f"--print-to-pdf={target}",
        ]
        if hasattr(os, "geteuid") and os.geteuid() == 0:
            cmd.insert(1, "--no-sandbox")  # the browser refuses to start as root otherwise
        cmd.append(html.resolve().as_uri())
        try:
            done = subprocess.run(cmd, capture_output=True, text=True, timeout=600)
        except (OSError, subprocess.TimeoutExpired) as exc:
            raise UsageError(f"--pdf-engine {engine}: the browser could not make a PDF ({exc})") from None
        if not target.exists():
            tail = (done.stderr or "").strip().splitlines()[-1:] or ["no message"]
            raise UsageError(f"--pdf-engine {engine}: the browser made no PDF ({tail[0]})")
        return target.read_bytes()
