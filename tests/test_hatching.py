"""The diagrams' hatching: 45-degree line segments clipped to a rectangle, checked against
elementary plane geometry (the distance between the parallel lines x + y = c1 and
x + y = c2 is |c1 - c2| / sqrt(2); a segment of x + y = c across a corner of a square
has length c * sqrt(2))."""
from __future__ import annotations

import math
import xml.etree.ElementTree as ET

import pytest
from hypothesis import given, strategies as st

from reportgen.report.hatching import hatch_path, hatch_segments, hatched_rect

SQRT2 = math.sqrt(2.0)


def approx(value: float):
    return pytest.approx(value, abs=1e-4)


def test_a_ten_unit_square_holds_two_lines_at_the_known_places():
    # Lines x + y = 6*sqrt(2)*k (spacing 6 measured square to them, elementary geometry):
    # k = 1, c = 8.4853, and k = 2, c = 16.9706, cross the square 0..10; k = 3 (25.46) > 20 does not.
    segments = hatch_segments(0.0, 0.0, 10.0, 10.0)
    assert len(segments) == 2
    (a1, b1, a2, b2), (c1, d1, c2, d2) = segments
    # c = 8.4853 < 10: from the left edge (0, c) to the top edge (c, 0); length c * sqrt(2) = 12.0
    assert (a1, b1, a2, b2) == (0.0, approx(8.4853), approx(8.4853), 0.0)
    assert math.isclose(math.dist((a1, b1), (a2, b2)), 12.0, abs_tol=1e-9)
    # c = 16.9706 > 10: from the bottom edge (6.9706, 10) to the right edge (10, 6.9706)
    assert (c1, d1, c2, d2) == (approx(6.9706), 10.0, 10.0, approx(6.9706))


@given(st.floats(-500, 500), st.floats(-500, 500), st.floats(0.5, 300), st.floats(0.5, 300),
       st.floats(1.0, 20.0))
def test_segments_lie_on_the_edges_at_45_degrees_spaced_as_asked(left, top, width, height, spacing):
    segments = hatch_segments(left, top, width, height, spacing)
    right, bottom = left + width, top + height
    eps = 1e-6 * (1 + abs(left) + abs(top) + width + height)
    sums = []
    for x1, y1, x2, y2 in segments:
        for x, y in ((x1, y1), (x2, y2)):
            assert left - eps <= x <= right + eps and top - eps <= y <= bottom + eps
            on_edge = min(abs(x - left), abs(x - right), abs(y - top), abs(y - bottom))
            assert on_edge <= eps
        assert math.isclose(x1 + y1, x2 + y2, abs_tol=eps)  # one line x + y = c
        assert x2 >= x1 - eps and y2 <= y1 + eps             # lower left to upper right
        sums.append(x1 + y1)
    # neighbours exactly `spacing` apart measured square to the lines: |c1 - c2| / sqrt(2)
    for c1, c2 in zip(sums, sums[1:]):
        assert math.isclose((c2 - c1) / SQRT2, spacing, rel_tol=1e-9, abs_tol=eps)
    # every line of the family that crosses the inside is there: the count is the number of
    # multiples of spacing*sqrt(2) strictly between left+top and right+bottom
    step = spacing * SQRT2
    expected = len([k for k in range(math.floor((left + top) / step) - 1, math.ceil((right + bottom) / step) + 2)
                    if left + top < k * step < right + bottom])
    assert len(segments) == expected


def test_the_same_family_continues_across_neighbouring_rectangles():
    # the lines are fixed on the page, not to each rectangle: two columns side by side show
    # one hatching (each c is a multiple of 6*sqrt(2))
    for x1, y1, _, _ in hatch_segments(37.0, 11.0, 20.0, 50.0) + hatch_segments(57.0, 11.0, 20.0, 50.0):
        k = (x1 + y1) / (6 * SQRT2)
        assert math.isclose(k, round(k), abs_tol=1e-9)


def test_nothing_to_draw_for_an_empty_rectangle():
    assert hatch_segments(0, 0, 0, 10) == [] and hatch_segments(0, 0, 10, -1) == []
    assert hatch_path(0, 0, 0, 10) == "" and hatched_rect(0, 0, 10, 0, clip_id="x", stroke="#000",
                                                          stroke_width=1) == ""


def test_the_svg_clips_the_lines_to_the_rectangle():
    svg = ('<svg xmlns="http://www.w3.org/2000/svg">'
           + hatched_rect(5, 5, 30, 12, clip_id="c1", stroke="#888", stroke_width=1.5,
                          extra=' stroke-opacity="0.5"') + "</svg>")
    root = ET.fromstring(svg)
    ns = "{http://www.w3.org/2000/svg}"
    clip = root.find(f"{ns}clipPath")
    rect = clip.find(f"{ns}rect")
    assert clip.get("id") == "c1" and [rect.get(k) for k in ("x", "y", "width", "height")] == [
        "5.00", "5.00", "30.00", "12.00"]
    path = root.find(f"{ns}path")
    assert path.get("clip-path") == "url(#c1)" and path.get("stroke-opacity") == "0.5"
    assert path.get("d").count("M") == len(hatch_segments(5, 5, 30, 12))
