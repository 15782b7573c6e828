"""Per-link loss diagram: hand-written SVG text (about a millisecond per link).

The diagram has two panels sharing one dB scale:

- left, the *build-up*: for each wavelength a staircase of the loss the limit set
  allows, added up from end A to end B (end connection, fiber between the joints,
  each joint, components, end connection). Positions along the link are schematic.
  The staircase ends exactly at the budget total (the limit).
- right, one *column per wavelength*: the limit as a bar, the zone above it hatched,
  and a mark per judged result at its measured loss: a hollow circle within the
  limit, a filled triangle over it. Shape, fill and hatching carry the meaning, so
  it reads in grayscale and without colour vision; colour only repeats it.

The limit value is printed beside each column. All labels come from
:mod:`reportgen.report.messages`; all input text is escaped.

References
----------
.. [1] reportgen project folder format v1, "How a result is judged": the budget terms.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Final

from markupsafe import escape

from reportgen.report import text_width
from reportgen.report.formats import format_db
from reportgen.report.hatching import hatched_rect
from reportgen.report.i18n import ENGLISH, Language
from reportgen.report.messages import Words
from reportgen.report.link_views import BudgetView, LinkView, ResultView

WIDTH: Final = 640
HEIGHT: Final = 156
PLOT_LEFT: Final = 46
PLOT_RIGHT: Final = 430
PLOT_TOP: Final = 22
PLOT_BOTTOM: Final = 120
COLUMN_LEFT: Final = 462
COLUMN_WIDTH: Final = 56
COLUMN_GAP: Final = 28
MAX_JOINT_STEPS: Final = 12  # more joints than this are drawn one step per kind
# Drawing guard, not a limit tolerance: the axis ticks are stepped by float addition, so
# the top tick may land a hair above the top and must still be drawn.
TICK_SLACK_DB: Final = 1e-9

# Line styles per wavelength, in order: (stroke colour, dash pattern). The dash differs
# for each, so the lines stay apart in grayscale.
LINE_STYLES: Final = (("#12355b", ""), ("#8a5a00", "7 4"), ("#4b6b3c", "2 3"), ("#555555", "10 3 2 3"))
OVER_COLOUR: Final = "#b5400f"
OVER_FILL: Final = "#fbeee6"  # under the hatching of the zone above the limit
WITHIN_COLOUR: Final = "#12355b"
# The labels' size (drawing units), weight (bold?) and colour: every label, then by class.
BASE_TEXT: Final = (10.0, False, "#222")
TEXT_CLASSES: Final = {"tick": (9.5, False, "#555"), "joint": (9.5, False, "#444"),
                       "end-label": (10.0, True, None), "value": (10.0, True, None)}


@dataclass(frozen=True)
class Step:
    """One element of the build-up: where it sits, what it adds, the total after it."""

    kind: str  # "end", "fiber", "connection", "splice", "component"
    label: str  # short label under the axis ("" for fiber pieces)
    position: float  # 0 (end A) .. 1 (end B), schematic
    loss_db: float
    cumulative_db: float


def _joints(budget: BudgetView, t: Words) -> list[tuple[str, str, float, int]]:
    """Joints between the ends as (kind, label, loss each, count)."""
    joints = []
    for term in budget.terms:
        if term.kind == "connections":
            joints.append(("connection", t["dg_connection"], term.allowance_db, int(term.quantity)))
        elif term.kind == "splices":
            joints.append(("splice", t["dg_splice"], term.allowance_db, int(term.quantity)))
        elif term.kind == "component":
            joints.append(("component", term.item_id or t["dg_component"], term.loss_db, 1))
    return joints


def build_steps(budget: BudgetView, lang: Language = ENGLISH) -> list[Step]:
    """The staircase of allowed loss from end A to end B for one wavelength.

    The fiber term is cut into equal pieces between the joints; joints are spread
    evenly; with more than ``MAX_JOINT_STEPS`` joints each kind is one step.
    The last step's ``cumulative_db`` equals ``budget.total_db`` [1]_ (up to
    floating-point rounding of the partial sums).
    """
    fiber_db = sum(t.loss_db for t in budget.terms if t.kind == "fiber")
    ends = sum(int(t.quantity) for t in budget.terms if t.kind == "end-connections")
    end_db = next((t.allowance_db for t in budget.terms if t.kind == "end-connections"), 0.0)
    words = Words(lang)
    joints = _joints(budget, words)
    singles = [(k, lab, loss, 1) for k, lab, loss, n in joints for _ in range(n)]
    if len(singles) <= MAX_JOINT_STEPS:
        joints = singles
    else:
        joints = [(k, f"{n}\u00d7 {lab}" if n > 1 else lab, loss * n, 1) for k, lab, loss, n in joints]
    pieces = len(joints) + 1
    steps: list[Step] = []
    total = 0.0

    def add(kind: str, label: str, position: float, loss_db: float) -> None:
        nonlocal total
        total += loss_db
        steps.append(Step(kind, label, position, loss_db, total))

    if ends >= 1:
        add("end", words["dg_end"], 0.0, end_db)
    for index, (kind, label, loss, _) in enumerate(joints, start=1):
        add("fiber", "", index / pieces, fiber_db / pieces)
        add(kind, label, index / pieces, loss)
    add("fiber", "", 1.0, fiber_db / pieces)
    if ends >= 2:
        add("end", words["dg_end"], 1.0, end_db * (ends - 1))
    return steps


def _nice_top_db(value_db: float) -> tuple[float, float]:
    """Axis top and tick step for values up to ``value_db`` (1, 2, 2.5, 5 × 10^n steps)."""
    value_db = max(value_db, 0.5)
    raw = value_db / 4
    power = 10 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1, 2, 2.5, 5, 10) if m * power >= raw)
    return step * math.ceil(value_db * 1.06 / step), step


class _Canvas:
    def __init__(self, top_db: float, lang: Language = ENGLISH) -> None:
        self.lang = lang
        self.t = Words(lang)
        self.top_db = top_db
        self.parts: list[str] = []

    def y(self, loss_db: float) -> float:
        loss_db = min(max(loss_db, 0.0), self.top_db)
        return round(PLOT_BOTTOM - (PLOT_BOTTOM - PLOT_TOP) * loss_db / self.top_db, 2)

    @staticmethod
    def x(position: float) -> float:
        return round(PLOT_LEFT + (PLOT_RIGHT - PLOT_LEFT) * position, 2)

    def add(self, text: str) -> None:
        self.parts.append(text)

    def text(self, x: float, y: float, label: str, cls: str = "", anchor: str = "start") -> None:
        """A label with ``anchor`` (start, middle, end) at ``x``, drawn from its left end
        (:mod:`reportgen.report.text_width`: fewer PDF objects than a ``text-anchor``)."""
        klass = f' class="{cls}"' if cls else ""
        size, bold, _ = TEXT_CLASSES.get(cls, BASE_TEXT)
        left = text_width.left_end(x, label, size, anchor, bold)
        self.add(f'<text x="{left:.1f}" y="{y:.1f}"{klass}>{escape(label)}</text>')


def _axes(canvas: _Canvas, step_db: float) -> None:
    tick = 0.0
    rules: list[str] = []
    while tick <= canvas.top_db + TICK_SLACK_DB:
        y = canvas.y(tick)
        rules.append(f"M{PLOT_LEFT},{y}H{PLOT_RIGHT}")
        canvas.text(PLOT_LEFT - 4, y + 3, canvas.lang.number(f"{tick:g}"), "tick", "end")
        tick += step_db
    # one path for all grid lines, one for both axes: fewer elements to lay out
    canvas.add(f'<path d="{"".join(rules)}" class="grid"/>')
    canvas.add(f'<path d="M{PLOT_LEFT},{PLOT_TOP}V{PLOT_BOTTOM}H{PLOT_RIGHT}" class="axis"/>')
    canvas.text(PLOT_LEFT - 4, PLOT_TOP - 8, canvas.t["dg_axis"], "tick", "end")
    canvas.text(PLOT_LEFT, PLOT_BOTTOM + 28, canvas.t["dg_start"], "end-label", "middle")
    canvas.text(PLOT_RIGHT, PLOT_BOTTOM + 28, canvas.t["dg_finish"], "end-label", "middle")


def _staircase(canvas: _Canvas, steps: list[Step], style: tuple[str, str]) -> None:
    colour, dash = style
    points = [(canvas.x(0.0), canvas.y(0.0))]
    position = 0.0
    for step in steps:
        if step.kind == "fiber":
            position = step.position
        points.append((canvas.x(position), canvas.y(step.cumulative_db)))
    path = " ".join(f"{x},{y}" for x, y in points)
    dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
    canvas.add(f'<polyline points="{path}" fill="none" stroke="{colour}" stroke-width="1.6"{dash_attr}/>')


def _joint_labels(canvas: _Canvas, steps: list[Step]) -> None:
    seen: set[tuple[float, str]] = set()
    ticks: list[str] = []
    for step in steps:
        if step.kind == "fiber" or (step.position, step.label) in seen:
            continue
        seen.add((step.position, step.label))
        x = canvas.x(step.position)
        ticks.append(f"M{x},{PLOT_BOTTOM}v4")
        canvas.text(x, PLOT_BOTTOM + 14, step.label, "joint", "middle")
    if ticks:
        canvas.add(f'<path d="{"".join(ticks)}" class="axis"/>')


def _column(canvas: _Canvas, index: int, budget: BudgetView, results: list[ResultView],
            style: tuple[str, str], hatch_id: str) -> None:
    colour, dash = style
    left = COLUMN_LEFT + index * (COLUMN_WIDTH + COLUMN_GAP)
    right = left + COLUMN_WIDTH
    y_limit = canvas.y(budget.total_db)
    over_height = max(y_limit - PLOT_TOP, 0)
    # the zone above the limit: a pale fill, the hatching, then its outline over both
    canvas.add(f'<rect x="{left}" y="{PLOT_TOP}" width="{COLUMN_WIDTH}" '
               f'height="{over_height:.2f}" fill="{OVER_FILL}" stroke="none"/>')
    canvas.add(hatched_rect(left, PLOT_TOP, COLUMN_WIDTH, over_height, clip_id=f"{hatch_id}{index}",
                            stroke=OVER_COLOUR, stroke_width=1.2))
    canvas.add(f'<rect x="{left}" y="{PLOT_TOP}" width="{COLUMN_WIDTH}" '
               f'height="{over_height:.2f}" fill="none" class="over"/>')
    canvas.add(f'<rect x="{left}" y="{y_limit}" width="{COLUMN_WIDTH}" '
               f'height="{PLOT_BOTTOM - y_limit:.2f}" class="within"/>')
    dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
    canvas.add(f'<line x1="{PLOT_RIGHT}" y1="{y_limit}" x2="{left}" y2="{y_limit}" '
               f'stroke="{colour}" stroke-width="0.8"{dash_attr}/>')
    canvas.add(f'<line x1="{left - 3}" y1="{y_limit}" x2="{right + 3}" y2="{y_limit}" class="limit"/>')
    canvas.text((left + right) / 2, PLOT_TOP - 5, canvas.t.format("dg_limit", value=format_db(budget.total_db, canvas.lang)), "value", "middle")
    canvas.text((left + right) / 2, PLOT_BOTTOM + 14, canvas.t.format("budget_wavelength", wavelength=budget.wavelength_nm), "joint", "middle")
    count = len(results)
    for n, result in enumerate(results):
        x = left + COLUMN_WIDTH * (n + 1) / (count + 1)
        y = canvas.y(result.loss_db)
        if result.verdict == "fail":
            canvas.add(f'<path d="M{x:.1f},{y - 4.5:.1f} L{x + 4.5:.1f},{y + 3.5:.1f} '
                       f'L{x - 4.5:.1f},{y + 3.5:.1f} Z" class="mark-over"/>')
        else:
            canvas.add(f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3.2" class="mark-within"/>')


def _text_style() -> str:
    """The labels' CSS, from :data:`BASE_TEXT` and :data:`TEXT_CLASSES` (which also give
    the sizes and weights their widths are computed with)."""
    size, _, fill = BASE_TEXT
    rules = [f'text{{font-family:"DejaVu Sans",sans-serif;font-size:{size:g}px;fill:{fill}}}']
    for name, (class_size, bold, class_fill) in TEXT_CLASSES.items():
        parts = ([f"font-size:{class_size:g}px"] if class_size != size else []) + (
            ["font-weight:bold"] if bold else []) + ([f"fill:{class_fill}"] if class_fill else [])
        rules.append(f".{name}{{{';'.join(parts)}}}")
    return "".join(rules)


def _style_block() -> str:
    return (
        '<style>'
        + _text_style() +
        '.grid{fill:none;stroke:#dddddd;stroke-width:0.5}.axis{fill:none;stroke:#333;stroke-width:0.8}'
        '.within{fill:#eef3f8;stroke:#9fb3c8;stroke-width:0.5}.over{stroke:#c9a48f;stroke-width:0.5}'
        f'.limit{{stroke:#111;stroke-width:1.8}}'
        f'.mark-within{{fill:#ffffff;stroke:{WITHIN_COLOUR};stroke-width:1.4}}'
        f'.mark-over{{fill:{OVER_COLOUR};stroke:#111;stroke-width:0.8}}'
        '</style>'
    )


def loss_diagram(link: LinkView, lang: Language = ENGLISH) -> str:
    """The loss diagram of one link as an ``<svg>`` element (text), or "" without budgets."""
    budgets = link.budgets
    if not budgets:
        return ""
    by_wavelength: dict[int, list[ResultView]] = {}
    for result in link.results:
        by_wavelength.setdefault(result.wavelength_nm, []).append(result)
    highest = max([b.total_db for b in budgets] + [r.loss_db for r in link.results])
    top_db, step_db = _nice_top_db(highest)
    canvas = _Canvas(top_db, lang)
    hatch_id = f"{link.anchor}-over"  # the clip paths of the hatching
    width = COLUMN_LEFT + len(budgets) * (COLUMN_WIDTH + COLUMN_GAP) + 4
    canvas.add(f'<svg xmlns="http://www.w3.org/2000/svg" class="loss-diagram" '
               f'viewBox="0 0 {max(width, WIDTH)} {HEIGHT}" width="{max(width, WIDTH)}" height="{HEIGHT}" '
               f'role="img" aria-label="{escape(Words(lang)["diagram_heading"])}">'
               # the title is the figure's alternative text in a tagged PDF
               f'<title>{escape(Words(lang)["diagram_heading"])}</title>')
    canvas.add(_style_block())
    _axes(canvas, step_db)
    steps_shown = None
    for index, budget in enumerate(budgets):
        style = LINE_STYLES[index % len(LINE_STYLES)]
        steps = build_steps(budget, lang)
        steps_shown = steps_shown or steps
        _staircase(canvas, steps, style)
        _column(canvas, index, budget, by_wavelength.get(budget.wavelength_nm, []), style, hatch_id)
        _legend_line(canvas, index, budget, style)
    if steps_shown:
        _joint_labels(canvas, steps_shown)
    canvas.add("</svg>")
    return "".join(canvas.parts)


def _legend_line(canvas: _Canvas, index: int, budget: BudgetView, style: tuple[str, str]) -> None:
    colour, dash = style
    x, y = PLOT_LEFT + 8 + index * 80, PLOT_TOP - 8
    dash_attr = f' stroke-dasharray="{dash}"' if dash else ""
    canvas.add(f'<line x1="{x}" y1="{y}" x2="{x + 22}" y2="{y}" stroke="{colour}" stroke-width="1.6"{dash_attr}/>')
    canvas.text(x + 26, y + 3, canvas.t.format("budget_wavelength", wavelength=budget.wavelength_nm), "wl")
