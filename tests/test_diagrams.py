"""The per-link loss diagram (hand-written SVG) and the project charts."""
from __future__ import annotations

import math
from collections import Counter
import xml.etree.ElementTree as ET
from datetime import datetime

import pytest
from hypothesis import given, settings, strategies as st

from builders import make_link, make_project
from reportgen.report import charts
from reportgen.report.diagrams import build_steps, loss_diagram
from reportgen.engine.judge import judge_project
from reportgen.model import Component, FiberType, LimitSet, ReferenceMethod
from reportgen.report.viewmodel import build_view

SVG = "{http://www.w3.org/2000/svg}"
NOW = datetime(2030, 2, 1, 12, 0)


def _view(links, results, **kwargs):
    project = make_project(links, results, **kwargs)
    return build_view(project, judge_project(project), now=NOW, version="test")


def test_staircase_ends_at_the_hand_worked_limit():
    # Hand-worked from the formula with tests/builders.TEST_LIMITS (OM4 850 nm: 2.0 dB/km,
    # 0.5 dB per connection, 0.1 dB per splice), one-cord (E = 2):
    # 0.5 km x 2.0 + (2 + 2) x 0.5 + 2 x 0.1 = 1.0 + 2.0 + 0.2 = 3.2 dB.
    view = _view([make_link("L1", connections=2, splices=2)], [])
    budget = next(b for b in view.links[0].budgets if b.wavelength_nm == 850)
    steps = build_steps(budget)
    assert math.isclose(budget.total_db, 3.2, abs_tol=1e-9)
    assert math.isclose(steps[-1].cumulative_db, budget.total_db, abs_tol=1e-9)
    kinds = [s.kind for s in steps]
    assert kinds[0] == "end" and kinds[-1] == "end"  # one-cord: both end connections
    assert kinds.count("connection") == 2 and kinds.count("splice") == 2
    assert math.isclose(sum(s.loss_db for s in steps if s.kind == "fiber"), 1.0, abs_tol=1e-9)
    assert all(b.cumulative_db >= a.cumulative_db for a, b in zip(steps, steps[1:]))


@pytest.mark.parametrize(("method", "ends"), [
    # End connections left in the measurement, IEC 61280-4-1/-4-2 as copied in budget.py.
    (ReferenceMethod.ONE_CORD, 2), (ReferenceMethod.TWO_CORD, 1), (ReferenceMethod.THREE_CORD, 0)])
def test_staircase_counts_the_end_connections_of_the_method(method, ends):
    view = _view([make_link("L1")], [], method=method)
    budget = view.links[0].budgets[0]
    steps = build_steps(budget)
    assert sum(s.loss_db for s in steps if s.kind == "end") == pytest.approx(ends * 0.5)
    assert steps[-1].cumulative_db == pytest.approx(budget.total_db)


def test_many_joints_are_one_step_per_kind_and_still_add_up():
    # Hand-worked: OS2 1310 nm inside 0.4 dB/km x 2 km = 0.8; 40 splices x 0.1 = 4.0;
    # part 3.5; ends 2 x 0.5 = 1.0; total 9.3 dB.
    link = make_link("L1", fiber_type=FiberType.OS2, length_m=2000.0,
                     splices=40, components=("p",))
    view = _view([link], [], components={"p": Component("p", 3.5)})
    budget = next(b for b in view.links[0].budgets if b.wavelength_nm == 1310)
    steps = build_steps(budget)
    assert budget.total_db == pytest.approx(9.3)
    assert steps[-1].cumulative_db == pytest.approx(9.3)
    assert [s.kind for s in steps].count("splice") == 1


def test_diagram_svg_parses_and_marks_each_result_by_shape():
    results = [dict(wavelength_nm=850, loss_db=1.0), dict(wavelength_nm=850, direction="ba", loss_db=9.0),
               dict(wavelength_nm=1300, loss_db=1.0)]
    view = _view([make_link("L1")], results)
    svg = loss_diagram(view.links[0])
    root = ET.fromstring(svg)
    assert root.tag == f"{SVG}svg"
    within = [c for c in root.iter(f"{SVG}circle") if c.get("class") == "mark-within"]
    over = [p for p in root.iter(f"{SVG}path") if p.get("class") == "mark-over"]
    assert (len(within), len(over)) == (2, 1)
    texts = "".join(t.text or "" for t in root.iter(f"{SVG}text"))
    # Limits at 850 and 1300 nm, hand-worked: 0.5 x 2.0 + 2 x 0.5 = 2.00; 0.5 x 1.0 + 1.0 = 1.50.
    assert "2.00" in texts and "1.50" in texts


def test_diagram_escapes_component_ids_and_ids_are_unique_per_link():
    evil = '<x onload="a">'
    view = _view([make_link("L1", components=(evil,)), make_link("L2")], [],
                 components={evil: Component(evil, 1.0)})
    first, second = (loss_diagram(link) for link in view.links)
    ET.fromstring(first)
    assert "<x onload" not in first
    ids = [set(e.get("id") for e in ET.fromstring(svg).iter() if e.get("id")) for svg in (first, second)]
    assert ids[0] and ids[1] and not ids[0] & ids[1]
    assert all(i.startswith("link-l1-") for i in ids[0]) and all(i.startswith("link-l2-") for i in ids[1])


def test_no_budget_no_diagram():
    # A limit set with no wavelength for OM4 gives no budget, hence no diagram.
    empty = LimitSet(id="empty", title="t", source="s", connection_db=0.5, splice_db=0.1,
                     attenuation_db_per_km={FiberType.OM4: {}})
    view = _view([make_link("L1")], [], limits=empty)
    assert loss_diagram(view.links[0]) == ""


def test_charts_are_reproducible_svg_with_text_as_text():
    view = _view([make_link("L1")], [dict(wavelength_nm=850, loss_db=1.0),
                                     dict(wavelength_nm=850, direction="ba", loss_db=3.0)])
    first, second = charts.margin_chart(view.links), charts.margin_chart(view.links)
    assert first == second
    assert "<dc:date>" not in first and "<text" in first  # svg.fonttype none keeps text
    ET.fromstring(first)
    bars = charts.verdict_chart(view.totals)
    ET.fromstring(bars)
    assert charts.svg_data_uri(bars).startswith("data:image/svg+xml;base64,")


def test_thin_dots_hand_worked():
    # page points = data points here; 0.25 pt apart or more in x or y is kept
    points = [(0.0, 0.0), (0.1, 0.0), (0.3, 0.05), (0.4, 0.2), (0.45, 0.6), (0.5, 0.62), (1.0, 1.0)]
    kept = charts.thin_dots(points, lambda p: p, within_pt=0.25)
    assert kept == [(0.0, 0.0), (0.3, 0.05), (0.45, 0.6), (1.0, 1.0)]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(min_value=-5, max_value=5), min_size=1, max_size=300),
       st.floats(min_value=0.01, max_value=2.0))
def test_thin_dots_keeps_the_ends_and_every_dropped_dot_is_near_a_kept_one(values, within):
    points = [(n / 10.0, m) for n, m in enumerate(sorted(values))]
    kept = charts.thin_dots(points, lambda p: p, within_pt=within)
    assert kept[0] == points[0] and kept[-1] == points[-1]
    assert all(point in points for point in kept)
    for x, y in points:
        assert any(abs(x - kx) < within and abs(y - ky) < within or (x, y) == (kx, ky)
                   for kx, ky in kept)


def test_margins_chart_of_many_results_draws_far_fewer_dots_and_every_failure():
    # 1,000 links x 2 strands x 2 directions at 850 nm; every 100th link fails
    links = [make_link(f"M{n:04d}") for n in range(1000)]
    results = [dict(link_id=f"M{n:04d}", wavelength_nm=850, strand=s, direction=d,
                    loss_db=2.9 if n % 100 == 0 else 0.5 + (n % 37) / 100)
               for n in range(1000) for s in (1, 2) for d in ("ab", "ba")]
    view = _view(links, results)
    svg = charts.margin_chart(view.links)
    root = ET.fromstring(svg)
    counts = Counter(use.get("{http://www.w3.org/1999/xlink}href") for use in root.iter(f"{SVG}use"))
    failing = sum(1 for link in view.links for r in link.results if r.verdict == "fail")
    assert failing == 40
    assert failing in counts.values()  # the failures' triangles: every one drawn
    # the passing margins' circles: one path, a closed subpath per circle
    dots = max(path.get("d", "").count("M") for path in root.iter(f"{SVG}path"))
    assert 100 < dots < 0.5 * (4000 - failing)


def test_the_dots_are_circles_of_the_scatter_markers_size_in_one_path():
    # A scatter marker's size s is its area in square points: s = 12 draws a circle
    # sqrt(12) = 3.464 pt across (matplotlib's scatter docs, "s: marker size in points**2"
    # meaning the marker's width squared).
    patch = charts.dots_patch([(10.0, 20.0), (30.0, 20.0)], 12)
    path = patch.get_path()
    assert list(path.codes).count(path.MOVETO) == 2
    extents = path.get_extents()
    assert (extents.x0, extents.x1) == pytest.approx((10 - 1.732, 30 + 1.732), abs=1e-3)
    assert (extents.y0, extents.y1) == pytest.approx((20 - 1.732, 20 + 1.732), abs=1e-3)
    # a point of the curve halfway round a quarter: the four-curve circle's error is tiny
    start, one, two, end = path.vertices[0:4] - (10.0, 20.0)
    t = 0.5
    mid = (1 - t) ** 3 * start + 3 * (1 - t) ** 2 * t * one + 3 * (1 - t) * t ** 2 * two + t ** 3 * end
    assert (mid[0] ** 2 + mid[1] ** 2) ** 0.5 == pytest.approx(1.732, rel=1e-3)


def test_chart_path_data_is_written_to_a_hundredth_of_a_point():
    svg = '<svg><path d="M 175.938545 70.820401 L -0.004 10.5 z"/><text x="1.23456">a</text></svg>'
    match = charts._PATH_DATA.search(svg)
    assert charts._rounded_path(match) == ' d="M 175.94 70.82 L -0 10.5 z"'


@pytest.mark.parametrize("label, bold", [("limit 2.33", True), ("850 nm", False), ("0", False),
                                         ("end", False), ("dB", False), ("A", True)])
def test_label_width_equals_freetype_layout_of_the_same_face(label, bold):
    # Independent check: Pillow lays the text out with FreeType from the same DejaVu Sans file
    # (these labels hold no kerning pair; text_width ignores kerning, see its docstring).
    from PIL import ImageFont
    import matplotlib, os
    from reportgen.report import text_width

    face = "DejaVuSans-Bold.ttf" if bold else "DejaVuSans.ttf"
    font = ImageFont.truetype(os.path.join(matplotlib.get_data_path(), "fonts", "ttf", face), 1000)
    assert text_width.text_width(label, 10.0, bold) == pytest.approx(font.getlength(label) / 100, abs=0.01)
    # DejaVu Sans digits advance 1303/2048 em (its hmtx table, read above by FreeType)
    assert text_width.text_width("0", 2048.0) == pytest.approx(1303.0)


def test_diagram_labels_are_placed_from_their_left_end_and_centred_where_they_were():
    from reportgen.report import diagrams, text_width

    view = _view([make_link("L1")], [dict(wavelength_nm=850, loss_db=1.0)])
    svg = loss_diagram(view.links[0])
    assert "text-anchor" not in svg  # each anchored label costs the PDF two objects
    root = ET.fromstring(svg)
    ends = [t for t in root.iter(f"{SVG}text") if t.get("class") == "end-label"]
    assert len(ends) == 2
    for text, centre in zip(ends, (diagrams.PLOT_LEFT, diagrams.PLOT_RIGHT)):
        middle = float(text.get("x")) + text_width.text_width(text.text, 10.0, bold=True) / 2
        assert middle == pytest.approx(centre, abs=0.06)
