"""QR symbols as inline SVG: alphanumeric mode, error correction M, a 4-module quiet zone."""

from __future__ import annotations

from typing import Final

import qrcode
from qrcode.constants import ERROR_CORRECT_M
from qrcode.util import MODE_ALPHA_NUM, QRData

QUIET: Final = 4  # modules of blank margin, as ISO/IEC 18004 asks


def qr_matrix(text: str) -> list[list[bool]]:
    """The dark/light modules of text's symbol, without the quiet zone."""
    qr = qrcode.QRCode(error_correction=ERROR_CORRECT_M, border=0, box_size=1)
    # Our codes use only 0-9, A-Z, '-' and '*': alphanumeric mode keeps the symbol small.
    qr.add_data(QRData(text, mode=MODE_ALPHA_NUM))
    qr.make(fit=True)
    return [list(row) for row in qr.get_matrix()]


def qr_svg(text: str, size_mm: float) -> str:
    """An <svg> element size_mm wide and high holding text's symbol and its quiet zone."""
    matrix = qr_matrix(text)
    n = len(matrix) + 2 * QUIET
    path = "".join(
        f"M{x + QUIET} {y + QUIET}h1v1h-1z" for y, row in enumerate(matrix) for x, dark in enumerate(row) if dark
    )
    return (
        f'<svg xmlns="http://www.w3.org/2000/svg" class="qr" width="{size_mm:g}mm" height="{size_mm:g}mm" '
        f'viewBox="0 0 {n} {n}" shape-rendering="crispEdges" role="img" aria-label="QR {text}">'
        f'<rect width="{n}" height="{n}" fill="#fff"/><path d="{path}" fill="#000"/></svg>'
    )
