"""The width of a line of text in DejaVu Sans, for placing SVG labels from their left end.

WeasyPrint draws an SVG ``<text>`` centred or right-aligned (``text-anchor`` middle or end)
by first drawing it into a form of its own to measure it: two more PDF objects per label.
The loss and level diagrams have about thirteen such labels per link sheet, which made
most of a sheet's forty objects, and the merge holds every object of the report (about
3 KB each in qpdf). So the diagrams compute each label's left end from the font's advance
widths and draw every label from its start.

The widths are the advance widths of the DejaVu Sans faces matplotlib ships (a dependency,
so always present; the report's DejaVu Sans is the same design and metrics), without
kerning, which moves a centred label by a fraction of a unit at most.
"""
from __future__ import annotations

import functools
from pathlib import Path
from typing import Final

import matplotlib
from fontTools.ttLib import TTFont

FACES: Final = {False: "DejaVuSans.ttf", True: "DejaVuSans-Bold.ttf"}
ANCHOR_SHARE: Final = {"start": 0.0, "middle": 0.5, "end": 1.0}


@functools.lru_cache(maxsize=2)
def _advances(bold: bool) -> tuple[dict[int, float], float]:
    """Advance width of each character (em units as a fraction of 1 em), and the default."""
    path = Path(matplotlib.get_data_path(), "fonts", "ttf", FACES[bold])
    with TTFont(str(path), lazy=True) as font:
        per_em = font["head"].unitsPerEm
        metrics = font["hmtx"].metrics
        widths = {code: metrics[glyph][0] / per_em for code, glyph in font.getBestCmap().items()}
        return widths, metrics[".notdef"][0] / per_em


def text_width(text: str, size: float, bold: bool = False) -> float:
    """Width of ``text`` set in DejaVu Sans at ``size`` (drawing units per em)."""
    widths, missing = _advances(bold)
    return size * sum(widths.get(ord(char), missing) for char in text)


def left_end(x: float, text: str, size: float, anchor: str, bold: bool = False) -> float:
    """Where ``text`` starts when ``anchor`` (start, middle, end) is at ``x``."""
    return x - ANCHOR_SHARE[anchor] * text_width(text, size, bold)
