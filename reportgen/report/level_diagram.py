"""Power level diagram of a link with a transceiver: hand-built SVG text. Pure.

The optical level falls from the launch power through each part of the link to the
receiver, drawn twice: the highest level (maximum launch power, least loss: solid
line, round markers) and the lowest (minimum launch power, worst loss: dashed line,
square markers). The receiver's window, lowest average receive power to overload, is a hatched band.
Readable in grayscale: lines differ by dash pattern and marker shape, not colour.

How the loss is split over the parts: each part (end connections, fiber, connections
between the ends, splices, catalog components) drops in proportion to its share of the
loss budget (the engine's :class:`reportgen.engine.budget.Budget`); the drops add up to the worst or
least loss of the power budget, so the end points are exact and the steps schematic.
A recommended attenuator is drawn as a last step before the receiver.

Texts come from :data:`LABELS` (English, marked for translation); :func:`translated_labels`
gives them in a report language, and numbers are written in its form.
"""
from __future__ import annotations

import hashlib
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Final
from xml.sax.saxutils import escape

from reportgen.engine.budget import Budget, TermKind
from reportgen.engine.power import PowerBudget
from reportgen.report import text_width
from reportgen.report.hatching import hatched_rect
from reportgen.report.i18n import ENGLISH, N_, Language

# Drawing guard, not a limit tolerance: the axis ticks are stepped by float subtraction,
# so the bottom tick may land a hair below the bottom and must still be drawn.
TICK_SLACK_DB: Final = 1e-9

LABELS: Final[dict[str, str]] = {
    "title": N_("Optical power level, {wavelength} nm ({basis})"),
    "measured": N_("measured loss"),
    "budget": N_("loss budget"),
    "launch": N_("launch"),
    "receiver": N_("receiver"),
    "link": N_("link"),
    TermKind.FIBER.value: N_("fiber"),
    TermKind.END_CONNECTIONS.value: N_("end conn."),
    TermKind.CONNECTIONS.value: N_("connections"),
    TermKind.SPLICES.value: N_("splices"),
    "attenuator": N_("attenuator {value} dB"),
    "highest": N_("highest level"),
    "lowest": N_("lowest level"),
    "window": N_("receiver window"),
    "overload": N_("overload {value} dBm"),
    "receive-minimum": N_("receive min. {value} dBm"),
    "axis": "dBm",
    "ok": N_("within the receiver window"),
    "too-weak": N_("too weak"),
    "too-strong": N_("too strong: fit an attenuator"),
    "no-fit": N_("too strong: no attenuator fits"),
}


@dataclass(frozen=True)
class LevelStep:
    """One part of the link in the diagram."""

    label: str  # already translated text
    share_db: float  # budgeted loss, used only as a proportion [dB]
    sloped: bool = False  # fiber: the level falls along it


def _left(x: float, label: str, anchor: str, bold: bool = False) -> str:
    """The x of a 10-unit label with ``anchor`` at ``x``, drawn from its left end (see
    :mod:`reportgen.report.text_width`: a ``text-anchor`` costs the PDF two objects)."""
    return f"{text_width.left_end(x, label, 10.0, anchor, bold):.1f}"


def level_steps(budget: Budget | None, labels: Mapping[str, str] = LABELS) -> tuple[LevelStep, ...]:
    """Parts of the link in launch-to-receiver order, from its loss budget.

    End connection at the launch end, fiber, connections, splices, components, end
    connection at the receiving end (the budget's end-connection term is split in two).
    Without a budget the link is one step.
    """
    if budget is None or budget.total_db <= 0:
        return (LevelStep(labels["link"], 1.0, sloped=True),)
    steps: list[LevelStep] = []
    ends = [t for t in budget.terms if t.kind is TermKind.END_CONNECTIONS and t.loss_db > 0]
    end_share = [t.loss_db / t.quantity for t in ends for _ in range(int(t.quantity))]
    end_label = labels[TermKind.END_CONNECTIONS.value]
    if end_share:
        steps.append(LevelStep(end_label, end_share[0]))
    for term in budget.terms:
        if term.kind is TermKind.END_CONNECTIONS or term.loss_db <= 0:
            continue
        label = term.item_id if term.kind is TermKind.COMPONENT else labels[term.kind.value]
        steps.append(LevelStep(str(label), term.loss_db, sloped=term.kind is TermKind.FIBER))
    if len(end_share) > 1:
        steps.append(LevelStep(end_label, sum(end_share[1:])))
    return tuple(steps)


def translated_labels(lang: Language) -> dict[str, str]:
    """:data:`LABELS` in the report's language."""
    return {key: lang.gettext(text) for key, text in LABELS.items()}


def _fmt(value: float, decimals: int = 1, lang: Language = ENGLISH) -> str:
    return lang.number(f"{value:.{decimals}f}").replace("-", "\u2212")


def _tick_step_db(span_db: float) -> float:
    for step in (1.0, 2.0, 5.0, 10.0):
        if span_db / step <= 8:
            return step
    return 20.0


def power_level_svg(
    power: PowerBudget,
    steps: Sequence[LevelStep] = (),
    labels: Mapping[str, str] = LABELS,
    *,
    lang: Language = ENGLISH,
    width_px: int = 600,
    height_px: int = 280,
) -> str:
    """The level diagram of one power budget as an SVG document (text).

    Parameters
    ----------
    power : PowerBudget
        Launch powers, losses, receiver window, attenuator and verdict.
    steps : sequence of LevelStep
        Parts of the link (:func:`level_steps`); empty: one step for the whole link.
    labels : mapping
        Texts (see :data:`LABELS`); pass a translated copy to change the language.
    lang : Language
        Writes the numbers in the language's form.
    width_px, height_px : int
        Size of the drawing. [px]

    Returns
    -------
    str
        A standalone ``<svg>`` element, deterministic for the same input.
    """
    steps = list(steps) or [LevelStep(labels["link"], 1.0, sloped=True)]
    total_share = sum(s.share_db for s in steps) or 1.0
    high = [power.tx_max_dbm]
    low = [power.tx_min_dbm]
    for step in steps:
        high.append(high[-1] - step.share_db / total_share * power.least_loss_db)
        low.append(low[-1] - step.share_db / total_share * power.worst_loss_db)
    kinds = [s.sloped for s in steps]
    names = [s.label for s in steps]
    if power.attenuator_db:
        names.append(labels["attenuator"].format(value=_fmt(power.attenuator_db, lang=lang)))
        kinds.append(False)
        high.append(high[-1] - power.attenuator_db)
        low.append(low[-1] - power.attenuator_db)
    names.append("")  # a flat stretch into the receiver, where its values are written
    kinds.append(True)
    high.append(high[-1])
    low.append(low[-1])

    left, right, top, bottom = 52, 150, 44, 50
    plot_w, plot_h = width_px - left - right, height_px - top - bottom
    levels = high + low + [power.rx_min_average_dbm, power.rx_overload_dbm]
    tick_db = _tick_step_db(max(levels) - min(levels) + 2)
    y_top = math.ceil((max(levels) + 0.5) / tick_db) * tick_db
    y_bottom = math.floor((min(levels) - 0.5) / tick_db) * tick_db

    def y(level_dbm: float) -> float:
        return round(top + (y_top - level_dbm) / (y_top - y_bottom) * plot_h, 1)

    stage_w = plot_w / (len(kinds) + 1)
    xs = [round(left + stage_w * (i + 0.5), 1) for i in range(len(kinds) + 1)]
    uid = "rg" + hashlib.sha1(power.link_id.encode("utf-8")).hexdigest()[:8]
    out = [
        f'<svg xmlns="http://www.w3.org/2000/svg" width="{width_px}" height="{height_px}" '
        f'viewBox="0 0 {width_px} {height_px}" role="img" font-family="DejaVu Sans, sans-serif" '
        f'font-size="10">',
        f"<title>{escape(power.link_id)}: {escape(labels[power.verdict.value])}</title>",
        f'<text x="{left}" y="16" font-size="12" font-weight="bold">'
        + escape(labels["title"].format(wavelength=power.wavelength_nm,
                                        basis=labels[power.basis.value])) + "</text>",
        f'<text x="{_left(width_px - 8, labels[power.verdict.value], "end", bold=True)}" y="16" '
        f'font-weight="bold">{escape(labels[power.verdict.value])}</text>',
    ]
    # receiver window band and its two edges
    y_over, y_sens = y(power.rx_overload_dbm), y(power.rx_min_average_dbm)
    out.append(hatched_rect(left, y_over, plot_w, round(y_sens - y_over, 1), clip_id=f"{uid}-window",
                            stroke="#888", stroke_width=1.5, extra=' stroke-opacity="0.5"'))
    for level, key in ((power.rx_overload_dbm, "overload"), (power.rx_min_average_dbm, "receive-minimum")):
        out.append(f'<line x1="{left}" y1="{y(level)}" x2="{left + plot_w}" y2="{y(level)}" '
                   f'stroke="#555" stroke-width="1"/>')
        out.append(f'<text x="{left + plot_w + 6}" y="{y(level) + 3}">'
                   f"{escape(labels[key].format(value=_fmt(level, lang=lang)))}</text>")
    out.append(f'<text x="{left + plot_w + 6}" y="{round((y_over + y_sens) / 2 + 3, 1)}" '
               f'font-style="italic">{escape(labels["window"])}</text>')
    # axis with ticks
    out.append(f'<line x1="{left}" y1="{top}" x2="{left}" y2="{top + plot_h}" stroke="#000"/>')
    level = y_top
    while level >= y_bottom - TICK_SLACK_DB:
        out.append(f'<line x1="{left - 4}" y1="{y(level)}" x2="{left}" y2="{y(level)}" '
                   f'stroke="#000"/><text x="{_left(left - 6, _fmt(level, 0, lang=lang), "end")}" '
                   f'y="{y(level) + 3}">{_fmt(level, 0, lang=lang)}</text>')
        level -= tick_db
    out.append(f'<text x="{_left(12, labels["axis"], "middle")}" y="{top + plot_h / 2}" '
               f'transform="rotate(-90 12 {top + plot_h / 2})">{escape(labels["axis"])}</text>')
    # the two level lines
    for series, dash, marker in ((high, "", "circle"), (low, ' stroke-dasharray="6 3"', "square")):
        points = [(xs[0], y(series[0]))]
        for i, sloped in enumerate(kinds):
            if not sloped:  # a discrete part: the level drops at the middle of its stage
                mid = round((xs[i] + xs[i + 1]) / 2, 1)
                points += [(mid, y(series[i])), (mid, y(series[i + 1]))]
            points.append((xs[i + 1], y(series[i + 1])))
        path = " ".join(f"{px},{py}" for px, py in points)
        out.append(f'<polyline points="{path}" fill="none" stroke="#000" stroke-width="2"{dash}/>')
        for px, value in ((xs[0], series[0]), (xs[-1], series[-1])):
            if marker == "circle":
                out.append(f'<circle cx="{px}" cy="{y(value)}" r="3.5" fill="#000"/>')
            else:
                out.append(f'<rect x="{px - 3.5}" y="{y(value) - 3.5}" width="7" height="7" '
                           f'fill="#fff" stroke="#000" stroke-width="1.5"/>')
    # values at launch and receiver
    # The lowest level's launch value goes well below its marker: the dashed line
    # leaves the marker falling through the first end connection.
    for value, above in ((high[0], True), (low[0], False)):
        out.append(f'<text x="{xs[0] + 6}" y="{y(value) + (-6 if above else 24)}">'
                   f"{_fmt(value, 2, lang=lang)}</text>")
    for value, above in ((high[-1], True), (low[-1], False)):
        out.append(f'<text x="{_left(xs[-1] - 6, _fmt(value, 2, lang=lang), "end")}" '
                   f'y="{y(value) + (-6 if above else 13)}">{_fmt(value, 2, lang=lang)}</text>')
    # stage names under the plot, staggered so neighbours do not collide
    stage_names = [labels["launch"], *names]
    for i, name in enumerate(stage_names[1:]):
        if not name:
            continue
        x_mid = round((xs[i] + xs[i + 1]) / 2, 1)
        out.append(f'<text x="{_left(x_mid, name, "middle")}" y="{top + plot_h + 14 + 11 * (i % 2)}">'
                   f'{escape(name)}</text>')
    for x_end, label in ((xs[0], labels["launch"]), (xs[-1], labels["receiver"])):
        out.append(f'<text x="{_left(x_end, label, "middle", bold=True)}" y="{top + plot_h + 40}" '
                   f'font-weight="bold">{escape(label)}</text>')
    # legend
    legend_y = 32
    out.append(f'<line x1="{left}" y1="{legend_y}" x2="{left + 24}" y2="{legend_y}" stroke="#000" '
               f'stroke-width="2"/><text x="{left + 28}" y="{legend_y + 3}">'
               f'{escape(labels["highest"])}</text>')
    out.append(f'<line x1="{left + 150}" y1="{legend_y}" x2="{left + 174}" y2="{legend_y}" '
               f'stroke="#000" stroke-width="2" stroke-dasharray="6 3"/>'
               f'<text x="{left + 178}" y="{legend_y + 3}">{escape(labels["lowest"])}</text>')
    out.append("</svg>")
    return "\n".join(out)
