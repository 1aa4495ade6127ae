"""Fonts for our PDFs: DejaVu Sans (and Mono), embedded, so µ, ≥, ± and accented names print.

reportlab's built-in Helvetica covers Latin-1 only and prints other characters
as black boxes (desktop-stack.md 4). DejaVu ships inside matplotlib
(``mpl-data/fonts/ttf``), which calcbuilder already depends on; the folder is
found without importing matplotlib. Debian's ``fonts-dejavu-core`` folder is the
fallback. Registration happens once per process.
"""

from __future__ import annotations

import importlib.util
from functools import cache
from pathlib import Path

from ..errors import CalcbuilderError

__all__ = ["FONT", "FONT_BOLD", "FONT_MONO", "font_folder", "register_fonts"]

FONT = "DejaVuSans"
FONT_BOLD = "DejaVuSans-Bold"
FONT_MONO = "DejaVuSansMono"
_FILES = {
    FONT: "DejaVuSans.ttf",
    FONT_BOLD: "DejaVuSans-Bold.ttf",
    "DejaVuSans-Oblique": "DejaVuSans-Oblique.ttf",
    "DejaVuSans-BoldOblique": "DejaVuSans-BoldOblique.ttf",
    FONT_MONO: "DejaVuSansMono.ttf",
}
_SYSTEM = Path("/usr/share/fonts/truetype/dejavu")


def font_folder() -> Path:
    """The folder holding the DejaVu TrueType files (matplotlib's copy first).

    Raises
    ------
    CalcbuilderError
        When neither matplotlib's fonts nor the system DejaVu fonts are found.
    """
    spec = importlib.util.find_spec("matplotlib")
    candidates = []
    if spec is not None and spec.origin is not None:
        candidates.append(Path(spec.origin).parent / "mpl-data" / "fonts" / "ttf")
    candidates.append(_SYSTEM)
    for folder in candidates:
        if all((folder / name).is_file() for name in _FILES.values()):
            return folder
    raise CalcbuilderError(
        "the DejaVu fonts needed for PDFs were not found (looked in "
        + ", ".join(str(c) for c in candidates)
        + "); reinstall matplotlib or install the fonts-dejavu-core package")


@cache
def register_fonts() -> tuple[str, str]:
    """Register DejaVu Sans (regular, bold, oblique, bold oblique) and DejaVu Sans Mono.

    Returns
    -------
    (regular, bold) : tuple of str
        The reportlab font names; ``<b>`` in a Paragraph in the regular font
        uses the bold one.
    """
    from reportlab.lib.fonts import addMapping
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    folder = font_folder()
    for name, file in _FILES.items():
        pdfmetrics.registerFont(TTFont(name, str(folder / file)))
    for bold, italic, name in ((0, 0, FONT), (1, 0, FONT_BOLD), (0, 1, "DejaVuSans-Oblique"),
                               (1, 1, "DejaVuSans-BoldOblique")):
        addMapping(FONT, bold, italic, name)
    return FONT, FONT_BOLD
