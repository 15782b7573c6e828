"""OTDR trace figure of one strand at one wavelength: hand-built SVG text. Pure.

Both directions on one axis of distance along the link from end A: the a→b trace as measured
(solid black), the b→a trace mirrored so its events line up (dashed mid-grey). A trace of
thousands of points is reduced for drawing by a min/max envelope per pixel column: each column
draws a vertical stroke from its lowest to its highest sample, so no reflective peak, however
narrow, is lost between columns. The strokes of one direction are one polyline, whose points
are then thinned where they lie on a straight line to within :data:`SIMPLIFY_PX` of a pixel
(:func:`simplify`): a point further off, such as the top of any peak, is always kept, so the
drawing is the envelope's to within half the line's width, with far fewer points for the PDF
renderer to handle (the benchmark's traces, whose noise of a few hundredths of a dB is
narrower than the line: about 500 points a figure at 0.2 units, about 100 at 0.4). Events are numbered as in the event table below the figure and
marked by kind with our own shapes: a connection is a diamond, a splice a circle, any other
event a square; a failed event is filled black, a passed one open. Meaning is carried by line
style, shape and fill, never by colour alone, so a grayscale print reads the same.

Texts come from :data:`LABELS` (English, marked for translation); :func:`translated_labels`
gives them in a report language, and tick numbers are written in its form. The key to the two
line styles and the axis titles are not in the figure: they are the same for every figure, and
the link sheet prints them once above its figures as HTML text (``otdr_labels`` in
templates/partials/link_otdr.html.j2), because WeasyPrint lays out and draws SVG text letter by
letter, which made them the larger part of a figure's render time.
"""
from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Final
from xml.sax.saxutils import escape

import numpy as np

from reportgen.engine.otdr import JUDGED_AS_CONNECTION, StrandOtdr
from reportgen.model import Direction, OtdrEventKind, OtdrSettings, OtdrTrace
from reportgen.report.i18n import ENGLISH, N_, Language

LABELS: Final[dict[str, str]] = {
    "title": N_("OTDR trace, strand {strand}, {wavelength} nm"),
    "ab": N_("from A (a→b)"),
    "ba": N_("from B (b→a), mirrored"),
    "axis_x": N_("distance from end A [m]"),
    "axis_y": N_("level [dB]"),
    "no_trace": N_("event table only: no trace samples"),
}
WIDTH: Final = 640
HEIGHT: Final = 162
LEFT, RIGHT, TOP, BOTTOM = 34, 10, 16, 18
SIMPLIFY_PX: Final = 0.4  # drawing units (1/640 of the figure's width): half the line's 0.8
TICKS: Final = 5  # about this many ticks per axis
# Numbers in the figure (ticks, event numbers) are set in a monospaced face and placed by their
# left end: a text anchored at its middle or end is drawn by the PDF renderer as a group of its
# own (a form object in the PDF, about 250 in every 20 figures), a text anchored at its start is
# not. Their widths are known: every glyph of DejaVu Sans Mono advances 1233/2048 em.
NUMERALS: Final = "DejaVu Sans Mono, monospace"
MONO_ADVANCE_EM: Final = 1233 / 2048
STYLE: Final = {Direction.AB: ('stroke="#111111"', ""), Direction.BA: ('stroke="#777777"', ' stroke-dasharray="4 2"')}
TRACE_DASH: Final = {Direction.AB: "", Direction.BA: ' stroke-dasharray="40 20"'}  # STYLE × 10


def envelope(x_m: np.ndarray, level_db: np.ndarray, x_low: float, x_high: float, columns: int
             ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(column, lowest, highest) of the samples falling into each of ``columns`` pixel columns
    over [x_low, x_high]; columns without a sample are left out."""
    inside = (x_m >= x_low) & (x_m <= x_high)
    col = np.minimum(((x_m[inside] - x_low) / (x_high - x_low) * columns).astype(np.int64), columns - 1)
    values = level_db[inside]
    if len(col) == 0:
        return col, values, values
    order = np.argsort(col, kind="stable")  # already sorted (or reversed) for a trace
    col, values = col[order], values[order]
    starts = np.flatnonzero(np.diff(col, prepend=col[0] - 1))
    return col[starts], np.minimum.reduceat(values, starts), np.maximum.reduceat(values, starts)


def simplify(points: np.ndarray, tolerance: float) -> np.ndarray:
    """The points of a polyline (n × 2) that must stay so that no dropped point lies further
    than ``tolerance`` from the line drawn through the kept ones (Ramer–Douglas–Peucker); the
    first and last points are always kept. A mask of the points kept.

    Every stretch between two kept points is split at its furthest point while that point is
    further than ``tolerance`` from the stretch's chord, all stretches at once in each round
    (the same points as splitting one stretch after the other)."""
    count = len(points)
    keep = np.zeros(count, dtype=bool)
    if count == 0:
        return keep
    keep[0] = keep[-1] = True
    x, y = points[:, 0], points[:, 1]
    index = np.arange(count)
    while True:
        kept = np.flatnonzero(keep)
        if len(kept) < 2:
            return keep
        stretch = np.clip(np.searchsorted(kept, index, side="right") - 1, 0, len(kept) - 2)
        ax, ay = x[kept[stretch]], y[kept[stretch]]
        dx, dy = x[kept[stretch + 1]] - ax, y[kept[stretch + 1]] - ay
        length = np.hypot(dx, dy)
        distance = np.where(length > 0,
                            np.abs(dx * (y - ay) - dy * (x - ax)) / np.where(length > 0, length, 1.0),
                            np.hypot(x - ax, y - ay))
        distance[keep] = 0.0
        worst = np.maximum.reduceat(distance, kept[:-1])  # per stretch
        split = worst > tolerance
        if not split.any():
            return keep
        at_worst = np.flatnonzero(split[stretch] & (distance == worst[stretch]))
        _, first = np.unique(stretch[at_worst], return_index=True)
        keep[at_worst[first]] = True


def _along(trace: OtdrTrace, settings: OtdrSettings, span_m: float) -> tuple[np.ndarray, np.ndarray]:
    samples = np.asarray(trace.samples_db, dtype=np.float64)
    launch = trace.launch_cord_m if trace.launch_cord_m is not None else settings.launch_cord_m
    x = np.arange(len(samples)) * (trace.sample_spacing_m or 0.0) - launch
    if trace.direction is Direction.BA:
        x = span_m - x
    return x, samples


def translated_labels(lang: Language) -> dict[str, str]:
    """:data:`LABELS` in the report's language."""
    return {key: lang.gettext(text) for key, text in LABELS.items()}


def trace_svg(strand: StrandOtdr, settings: OtdrSettings | None = None,
              labels: Mapping[str, str] = LABELS, lang: Language = ENGLISH) -> str:
    """The figure of ``strand`` as an ``<svg>`` element."""
    settings = settings or OtdrSettings()
    span = strand.length_m if strand.length_m is not None else strand.documented_length_m
    x_low = min([0.0, *(e.position_m for e in strand.events)]) - 10.0
    x_high = max([span, *(e.position_m for e in strand.events)]) + 10.0
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    drawn = [(t.direction, *_along(t, settings, span)) for t in strand.traces
             if t.samples_db is not None and len(t.samples_db) and t.sample_spacing_m]
    # The level axis covers the fiber between the launch and the far end (the drop to the noise
    # floor past the end is cut at the bottom), with 2 dB to spare below.
    ends = [e.position_m for e in strand.events if e.kind is OtdrEventKind.END]
    fiber_to = (min(ends) if ends else x_high) - 2.0
    # each trace only up to its own fiber end: past it, a mirrored trace's noise floor would
    # otherwise fall inside the drawn range and stretch the axis down to the floor
    levels = [lv[(x >= x_low) & (x <= fiber_to) & (np.arange(len(lv)) <= own_end)]
              for (_d, x, lv), own_end in zip(drawn, _end_samples(strand, settings))]
    levels = [lv for lv in levels if len(lv)]
    y_high = math.ceil(max(float(lv.max()) for lv in levels)) if levels else 0.0
    y_low = math.floor(min(float(np.percentile(lv, 1)) for lv in levels)) - 2.0 if levels else -1.0
    if y_high - y_low < 1.0:
        y_low = y_high - 1.0

    def px(x: float) -> float:
        return LEFT + (x - x_low) / (x_high - x_low) * plot_w

    def py(y: float) -> float:
        return TOP + (y_high - min(max(y, y_low), y_high)) / (y_high - y_low) * plot_h

    title = labels["title"].format(strand=strand.strand, wavelength=strand.wavelength_nm)
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class="otdr-trace" viewBox="0 0 {WIDTH} {HEIGHT}" '
           f'width="{WIDTH}" height="{HEIGHT}" role="img" aria-label="{escape(title)}" '
           'font-family="DejaVu Sans, sans-serif" font-size="9">',
           f'<title>{escape(title)}</title>',  # the alternative text in a tagged PDF
           f'<rect x="{LEFT}" y="{TOP}" width="{plot_w}" height="{plot_h}" fill="none" stroke="#999999" '
           'stroke-width="0.5"/>']
    x_ticks, y_ticks = _ticks(x_low, x_high), _ticks(y_low, y_high)
    marks = [f"M{px(t):.1f},{TOP + plot_h}v3" for t in x_ticks]
    marks += [f"M{LEFT - 3},{py(t):.1f}h3" for t in y_ticks]
    out.append(f'<path d="{"".join(marks)}" stroke="#111111" stroke-width="0.5" fill="none"/>')
    out.append(_placed_text([(px(t), TOP + plot_h + 12, 0.5, lang.number(f"{t:g}")) for t in x_ticks]
                            + [(LEFT - 5, py(t) + 3, 1.0, lang.number(f"{t:g}")) for t in y_ticks], 9))
    for direction, x, level in drawn:
        cols, low, high = envelope(x, level, x_low, x_high, plot_w)
        if not len(cols):
            continue
        # each column a stroke from its lowest to its highest sample, the columns joined in order
        points = np.empty((2 * len(cols), 2))
        points[:, 0] = np.repeat(LEFT + cols + 0.5, 2)
        scale = plot_h / (y_high - y_low)
        points[0::2, 1] = TOP + (y_high - np.clip(low, y_low, y_high)) * scale  # py(), vectorised
        points[1::2, 1] = TOP + (y_high - np.clip(high, y_low, y_high)) * scale
        kept = points[simplify(points, SIMPLIFY_PX)]
        stroke = STYLE[direction][0]
        # tenths of a unit as whole numbers, scaled back by the transform (quick to write)
        text = " ".join(map(str, np.rint(kept * 10).astype(np.int64).ravel().tolist()))
        out.append(f'<polyline fill="none" {stroke}{TRACE_DASH[direction]} stroke-width="8" '
                   f'transform="scale(0.1)" points="{text}"/>')
    if not drawn:
        out.append(f'<text x="{LEFT + plot_w / 2:.1f}" y="{TOP + plot_h / 2:.1f}" text-anchor="middle">'
                   f'{escape(labels["no_trace"])}</text>')
    # events: one path of dotted guides, one path per fill of the marks (few elements to draw)
    guides, shapes = [], {"#111111": [], "#ffffff": []}
    numbers = []
    for number, event in enumerate(strand.events, start=1):
        cx, cy = px(event.position_m), TOP + 10
        guides.append(f"M{cx:.1f},{cy + 5:.1f}V{TOP + plot_h}")
        shapes["#111111" if event.verdict == "fail" else "#ffffff"].append(
            f"M{cx:.1f},{cy - 5:.1f}l5,5l-5,5l-5,-5z" if event.kind in JUDGED_AS_CONNECTION
            else f"M{cx - 4:.1f},{cy:.1f}a4,4 0 1,0 8,0a4,4 0 1,0 -8,0z" if event.kind is OtdrEventKind.SPLICE
            else f"M{cx - 3.5:.1f},{cy - 3.5:.1f}h7v7h-7z")
        left = cx - len(str(number)) * MONO_ADVANCE_EM * 8 / 2  # centred over the mark
        numbers.append(f'<text x="{left:.1f}" y="{cy - 8:.1f}" font-family="{NUMERALS}" font-size="8">{number}</text>')
    if guides:
        out.append(f'<path d="{"".join(guides)}" stroke="#bbbbbb" stroke-width="0.5" '
                   'stroke-dasharray="1 2" fill="none"/>')
    for fill, parts in shapes.items():
        if parts:
            out.append(f'<path d="{"".join(parts)}" fill="{fill}" stroke="#111111" stroke-width="0.8"/>')
    out += numbers
    out.append("</svg>")
    return "".join(out)


def _placed_text(labels: list[tuple[float, float, float, str]], size: float) -> str:
    """One ``<text>`` element in :data:`NUMERALS` holding every label of ``labels``, each given
    as (x, y of its baseline, anchor, text), anchor 0 for its left end at x, 0.5 its middle,
    1 its right end: each letter is placed by its own x and y (one text element draws faster
    than one per label)."""
    advance = MONO_ADVANCE_EM * size
    xs, ys, letters = [], [], []
    for x, y, anchor, text in labels:
        left = x - anchor * len(text) * advance
        xs += [f"{left + i * advance:.1f}" for i in range(len(text))]
        ys += [f"{y:.1f}"] * len(text)
        letters.append(text)
    return (f'<text x="{" ".join(xs)}" y="{" ".join(ys)}" font-family="{NUMERALS}" font-size="{size:g}">'
            f'{escape("".join(letters))}</text>')


def _end_samples(strand: StrandOtdr, settings: OtdrSettings) -> list[float]:
    """Per drawn trace of ``strand`` (as :func:`trace_svg` draws them), the index of the sample
    at its own fiber end (2 m short of it), or infinity when the trace has no end event."""
    out = []
    for t in strand.traces:
        if t.samples_db is None or not len(t.samples_db) or not t.sample_spacing_m:
            continue
        ends = [e.position_m for e in t.events if e.kind is OtdrEventKind.END]
        out.append((max(ends) - 2.0) / t.sample_spacing_m if ends else math.inf)
    return out


def _ticks(low: float, high: float, count: int = TICKS) -> list[float]:
    raw = (high - low) / count
    step = 10 ** math.floor(math.log10(raw))
    for factor in (1, 2, 5, 10):
        if raw <= factor * step:
            step *= factor
            break
    first = math.ceil(low / step) * step
    return [round(first + i * step, 6) for i in range(int((high - first) / step) + 1)]
