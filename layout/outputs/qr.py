"""QR symbols as inline SVG: alphanumeric mode, error correction M, a 4-module quiet zone."""

from __future__ import annotations

from typing import Final

import numpy as np
import qrcode
from qrcode.constants import ERROR_CORRECT_M
from qrcode.util import MODE_ALPHA_NUM, QRData

from layout.outputs.qrbatch import fits, symbols

QUIET: Final = 4  # modules of blank margin, as ISO/IEC 18004 asks


def qr_matrix(text: str) -> list[list[bool]]:
    """The dark/light modules of text's symbol, without the quiet zone."""
    qr = qrcode.QRCode(error_correction=ERROR_CORRECT_M, border=0, box_size=1)
    # Our codes use only 0-9, A-Z, '-' and '*': alphanumeric mode keeps the symbol small.
    qr.add_data(QRData(text, mode=MODE_ALPHA_NUM))
    qr.make(fit=True)
    return [list(row) for row in qr.get_matrix()]


def qr_svgs(texts: list[str], size_mm: float) -> dict[str, str]:
    """text → its <svg>, for many texts: version-1 symbols made in one batch (layout.outputs.qrbatch),
    any longer text by the qrcode library."""
    unique = list(dict.fromkeys(texts))
    short = [t for t in unique if fits(t)]
    out = {t: _svg(t, m, size_mm) for t, m in zip(short, symbols(short), strict=True)}
    out.update({t: qr_svg(t, size_mm) for t in unique if not fits(t)})
    return out


def qr_svg(text: str, size_mm: float) -> str:
    """An <svg> element size_mm wide and high holding text's symbol and its quiet zone."""
    return _svg(text, np.array(qr_matrix(text), dtype=bool), size_mm)


def _svg(text: str, matrix: np.ndarray, size_mm: float) -> str:
    n = len(matrix) + 2 * QUIET
    parts = []
    for y, row in enumerate(matrix.tolist()):  # one rectangle per horizontal run of dark modules
        x = 0
        while x < len(row):
            if row[x]:
                start = x
                while x < len(row) and row[x]:
                    x += 1
                parts.append(f"M{start + QUIET} {y + QUIET}h{x - start}v1h-{x - start}z")
            x += 1
    path = "".join(parts)
    return (
        f'<svg xmlns="http://www.w3.org/2000/svg" class="qr" width="{size_mm:g}mm" height="{size_mm:g}mm" '
        f'viewBox="0 0 {n} {n}" shape-rendering="crispEdges" role="img" aria-label="QR {text}">'
        f'<rect width="{n}" height="{n}" fill="#fff"/><path d="{path}" fill="#000"/></svg>'
    )
