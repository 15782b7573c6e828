"""Project-level charts drawn with matplotlib, returned as SVG text.

Built on ``matplotlib.figure.Figure`` (no pyplot state), text kept as text
(``svg.fonttype: none``), a fixed ``svg.hashsalt`` and no date metadata, so the
same project gives the same SVG. Meaning is carried by shape and hatching as well
as by colour. Labels are in the report's language; in other languages than English the
numbers of the value axis are written in the language's form too.
"""
from __future__ import annotations

import base64
import io
import re
from collections.abc import Callable, Sequence
from typing import Any, Final

import matplotlib
from matplotlib.figure import Figure
from matplotlib.patches import PathPatch
from matplotlib.path import Path as CurvePath
from matplotlib.transforms import Affine2D, IdentityTransform

from matplotlib.ticker import FuncFormatter

from reportgen.report.i18n import ENGLISH, SOURCE_LANGUAGE, Language
from reportgen.report.messages import Words
from reportgen.report.link_views import LinkView

_RC: Final = {
    "svg.fonttype": "none",
    "svg.hashsalt": "reportgen",
    "font.family": "DejaVu Sans",
    "font.size": 8,
    "axes.linewidth": 0.6,
}
WITHIN_COLOUR: Final = "#12355b"
DOT_THIN_PT: Final = 0.25  # the margins chart leaves out a dot this close to the one before
OVER_COLOUR: Final = "#b5400f"
VERDICT_STYLE: Final = {  # face colour, hatch
    "pass": ("#cfdcea", ""),
    "fail": (OVER_COLOUR, "////"),
    "incomplete": ("#ffffff", ".."),
}


def figure_to_svg(fig: Figure) -> str:
    """The figure as an ``<svg>`` element (no XML prolog), reproducibly."""
    buffer = io.StringIO()
    with matplotlib.rc_context(_RC):
        fig.savefig(buffer, format="svg", metadata={"Date": None, "Creator": None})
    text = buffer.getvalue()
    return _PATH_DATA.sub(_rounded_path, text[text.index("<svg"):])


# matplotlib writes path coordinates with six decimals; two (0.01 pt, 3.5 micrometres)
# are far finer than print, and the margins chart's dots are thousands of coordinates.
_PATH_DATA: Final = re.compile(r' d="([^"]*)"')


def _rounded_path(match: re.Match[str]) -> str:
    """A ``d`` attribute with its numbers to two decimals (matplotlib separates every
    command letter and number by a space)."""
    return ' d="' + " ".join(_two_decimals(token) for token in match.group(1).split(" ")) + '"'


def _two_decimals(token: str) -> str:
    if "." not in token:
        return token  # a command letter or a whole number
    return f"{float(token):.2f}".rstrip("0").rstrip(".")


def _figure(width_in: float, height_in: float) -> Figure:
    with matplotlib.rc_context(_RC):
        return Figure(figsize=(width_in, height_in), dpi=72)


def margin_groups(links: Sequence[LinkView], lang: Language = ENGLISH) -> dict[str, list[tuple[float, bool]]]:
    """Judged margins per "fiber type, wavelength" as (margin dB, over the limit)."""
    groups: dict[tuple[str, int], list[tuple[float, bool]]] = {}
    for link in links:
        for result in link.results:
            if result.margin_db is not None:
                groups.setdefault((link.fiber_type, result.wavelength_nm), []).append(
                    (result.margin_db, result.verdict == "fail"))
    t = Words(lang)
    return {f"{fiber}\n{t.format('budget_wavelength', wavelength=wl)}": groups[(fiber, wl)]
            for fiber, wl in sorted(groups)}


def thin_dots(points: Sequence[tuple[float, float]], to_page: Callable[[Any], Any],
              within_pt: float = DOT_THIN_PT) -> list[tuple[float, float]]:
    """``points`` in order, without each one drawn less than ``within_pt`` from the last
    one kept (in both directions; ``to_page`` maps data to page points, 72 per inch).

    The margins chart draws every margin; a column's dots run along a rising curve
    (sorted), so at 160,000 results most dots would be drawn on top of the one before
    and only make the page slow to render. The first and last dots are always kept
    (the axes' extent), and every dropped dot lies within ``within_pt`` of a kept one,
    a small fraction of a dot's own width (about 3.5 pt).
    """
    if len(points) < 3:
        return list(points)
    places = to_page(points)
    kept = [0]
    last_x, last_y = places[0]
    for index in range(1, len(points) - 1):
        x, y = places[index]
        if abs(x - last_x) >= within_pt or abs(y - last_y) >= within_pt:
            kept.append(index)
            last_x, last_y = x, y
    kept.append(len(points) - 1)
    return [points[index] for index in kept]


# A unit circle as four cubic Bezier curves (control points at 0.5523 of the radius, the
# usual quarter-circle fit, off by 0.03 % of the radius); matplotlib's own has eight.
_K: Final = 0.5522847498
_CIRCLE: Final = CurvePath(
    [(1, 0), (1, _K), (_K, 1), (0, 1), (-_K, 1), (-1, _K), (-1, 0), (-1, -_K), (-_K, -1),
     (0, -1), (_K, -1), (1, -_K), (1, 0), (1, 0)],
    [CurvePath.MOVETO] + [CurvePath.CURVE4] * 12 + [CurvePath.CLOSEPOLY])


def dots_patch(places: Sequence[tuple[float, float]], area_pt2: float, **style: Any) -> PathPatch:
    """Circles of ``area_pt2`` square points (a scatter marker's ``s``) centred on
    ``places`` (page points), as one path: an SVG ``<path>`` for them all. A scatter plot
    writes a ``<use>`` element per dot, which WeasyPrint draws one by one (measured: most
    of the time of the charts' page at 500 links). Where dots overlap, each outline shows
    (a scatter would cover the earlier ones with the later ones' white)."""
    radius = area_pt2 ** 0.5 / 2
    circle = _CIRCLE
    path = CurvePath.make_compound_path(*(
        circle.transformed(Affine2D().scale(radius).translate(x, y)) for x, y in places))
    return PathPatch(path, transform=IdentityTransform(), **style)


def _local_numbers(axis, lang: Language) -> None:
    """Tick numbers of ``axis`` in the language's form (English: matplotlib's own)."""
    if lang.code != SOURCE_LANGUAGE:
        axis.set_major_formatter(FuncFormatter(
            lambda value, _: lang.number(f"{value:g}").replace("-", "\u2212")))


def margin_chart(links: Sequence[LinkView], lang: Language = ENGLISH) -> str:
    """Dots of every judged margin, one column per fiber type and wavelength."""
    groups = margin_groups(links, lang)
    t = Words(lang)
    with matplotlib.rc_context(_RC):
        fig = _figure(6.6, 2.7)
        ax = fig.add_axes((0.09, 0.2, 0.89, 0.7))
        ax.axhline(0.0, color="#111111", linewidth=1.2)
        ax.text(-0.58, 0.0, t["chart_zero"], va="bottom", ha="left", fontsize=7)
        columns = []
        for index, values in enumerate(groups.values()):
            values = sorted(values)  # smallest margin at the left of its column
            count = len(values)
            spread = [index + 0.6 * ((n + 0.5) / count - 0.5) for n in range(count)]
            columns.append(([(x, m) for x, (m, over) in zip(spread, values) if not over],
                            [(x, m) for x, (m, over) in zip(spread, values) if over]))
        every = [point for within, over in columns for point in (*within, *over)]
        if every:  # the axes' limits from every dot, so that thinning cannot change them
            ax.update_datalim(every)
            ax.autoscale_view()
        ax.set_xticks(range(len(groups)), list(groups))
        ax.set_xlim(-0.6, max(len(groups), 1) - 0.4)
        ax.set_ylim(ax.get_ylim())  # fixed now: the dots below are placed in page points
        for within, over in columns:
            if within:
                places = ax.transData.transform(thin_dots(within, ax.transData.transform))
                ax.add_patch(dots_patch(places, 12, facecolor="white", edgecolor=WITHIN_COLOUR,
                                        linewidth=0.8, zorder=3))
            if over:
                ax.scatter(*zip(*over), s=26, color=OVER_COLOUR, edgecolors="#111111",
                           linewidths=0.5, marker="^", zorder=4)
        ax.set_ylabel(t["chart_margin_axis"])
        _local_numbers(ax.yaxis, lang)
        ax.grid(axis="y", color="#dddddd", linewidth=0.5)
        ax.set_axisbelow(True)
        if not groups:
            ax.text(0.5, 0.5, t["chart_no_results"], transform=ax.transAxes, ha="center")
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        return figure_to_svg(fig)


def verdict_chart(totals: dict[str, int] | object, lang: Language = ENGLISH) -> str:
    """Horizontal bars: links per verdict, each verdict with its own fill and hatching."""
    order = ("pass", "fail", "incomplete")
    counts = [int(totals[v]) for v in order]  # type: ignore[index]
    t = Words(lang)
    with matplotlib.rc_context(_RC):
        fig = _figure(6.6, 1.3)
        ax = fig.add_axes((0.16, 0.3, 0.8, 0.62))
        for row, (verdict, count) in enumerate(zip(order, counts)):
            face, hatch = VERDICT_STYLE[verdict]
            ax.barh(row, count, color=face, edgecolor="#111111", hatch=hatch, linewidth=0.6, height=0.62)
            ax.text(count, row, f"  {count}", va="center", ha="left", fontsize=8)
        ax.set_yticks(range(len(order)), [t[f"verdict_{v}"] for v in order])
        ax.invert_yaxis()
        ax.set_xlim(0, max(max(counts), 1) * 1.15)
        ax.set_xlabel(t["chart_counts_axis"])
        ax.xaxis.get_major_locator().set_params(integer=True)
        for side in ("top", "right"):
            ax.spines[side].set_visible(False)
        return figure_to_svg(fig)



def svg_data_uri(svg: str) -> str:
    """An SVG document as a ``data:`` URI (keeps matplotlib's element ids out of the page)."""
    return "data:image/svg+xml;base64," + base64.b64encode(svg.encode("utf-8")).decode("ascii")
