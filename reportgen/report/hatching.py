"""Diagonal hatching for the SVG diagrams, drawn as plain line segments.

An SVG ``<pattern>`` fill looked the same, but a PDF renderer turns every patterned area into a
tiling pattern, a form and two resource dictionaries: at one link a page that was about a third
of the objects the merge had to hold for the whole report. Lines clipped to the area draw the
same hatching into the page's content stream, which costs nothing once the page is copied.

The lines run at 45 degrees, lower left to upper right on the page (SVG's y axis points down):
each is a line ``x + y = c`` with ``c`` a multiple of ``spacing * sqrt(2)``, so neighbouring
lines are ``spacing`` apart, measured square to them, and the hatching of two areas lines up.
"""

from __future__ import annotations

import math

def hatch_segments(left: float, top: float, width: float, height: float,
                   spacing: float = 6.0) -> list[tuple[float, float, float, float]]:
    """The hatch lines crossing the rectangle, each as ``(x1, y1, x2, y2)`` on its edges.

    Line ``x + y = c`` enters the rectangle where it crosses the left or top edge and leaves
    across the right or bottom edge; lines that only touch a corner are left out.
    """
    if width <= 0 or height <= 0 or spacing <= 0:
        return []
    step = spacing * math.sqrt(2.0)
    right, bottom = left + width, top + height
    segments = []
    k = math.floor((left + top) / step) + 1
    while (c := k * step) < right + bottom:
        # start on the left edge (x = left) or, past the bottom-left corner, the bottom edge
        x1, y1 = (left, c - left) if c - left <= bottom else (c - bottom, bottom)
        # end on the top edge (y = top) or, past the top-right corner, the right edge
        x2, y2 = (c - top, top) if c - top <= right else (right, c - right)
        segments.append((x1, y1, x2, y2))
        k += 1
    return segments


def hatch_path(left: float, top: float, width: float, height: float,
               spacing: float = 6.0) -> str:
    """The path data (``d``) of :func:`hatch_segments`, coordinates to 0.01."""
    return "".join(f"M{x1:.2f},{y1:.2f}L{x2:.2f},{y2:.2f}"
                   for x1, y1, x2, y2 in hatch_segments(left, top, width, height, spacing))


def hatched_rect(left: float, top: float, width: float, height: float, *, clip_id: str,
                 stroke: str, stroke_width: float, spacing: float = 6.0,
                 extra: str = "") -> str:
    """A path drawing the hatch lines of one rectangle, clipped to it (so the line ends do
    not stand out past its edges). ``clip_id`` names the clip path, unique in the document
    (derived from the link, so that a page's HTML does not depend on what was drawn before);
    ``extra`` is added to the path's attributes (an opacity)."""
    d = hatch_path(left, top, width, height, spacing)
    if not d:
        return ""
    return (f'<clipPath id="{clip_id}"><rect x="{left:.2f}" y="{top:.2f}" width="{width:.2f}" '
            f'height="{height:.2f}"/></clipPath>'
            f'<path d="{d}" clip-path="url(#{clip_id})" fill="none" stroke="{stroke}" '
            f'stroke-width="{stroke_width:g}"{extra}/>')
