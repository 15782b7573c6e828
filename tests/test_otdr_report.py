"""The OTDR part of a link sheet: the trace figure (min/max envelope, grayscale) and the event table."""
from __future__ import annotations

import re
from datetime import datetime, timezone

import numpy as np

from builders import synth_sor, well_formed
from reportgen.engine.judge import judge_project
from reportgen.engine.otdr import assess_otdr
from reportgen.inputs.project import load_project
from reportgen.inputs.sor import write_sor
from reportgen.report.otdr_figure import envelope, trace_svg
from reportgen.report.render import build_report

YAML = (
    "project:\n  title: Test backbone\n  contractor: {name: Test Cabling}\n"
    "testing:\n  limits: tia-568.3-d\n  reference_method: one-cord\n"
    "  otdr: {launch_cord_m: 100, receive_cord_m: 100}\n"
    "instruments:\n  - {id: SRC-1, kind: light-source}\n  - {id: PM-1, kind: power-meter}\n"
)
LINKS = "link_id,end_a,end_b,fiber_type,length_m,strands,splices\nL1,Room 1,Room 2,OM4,120,2,0\nL2,Room 1,Hut 3,OS2,1500,1,1\n"


def test_envelope_keeps_a_one_sample_peak():
    x = np.arange(100_000) * 0.1
    level = -10.0 - x / 1000
    level[54_321] = -1.0  # one sample of 100,000, far narrower than a pixel column
    cols, low, high = envelope(x, level, 0.0, x[-1], 500)
    assert len(cols) == 500 and high.max() == -1.0
    assert low.min() == level.min()


def test_thinning_keeps_every_peak_and_stays_within_its_tolerance():
    from reportgen.report.otdr_figure import SIMPLIFY_PX, simplify

    rng = np.random.default_rng(3)
    x = np.arange(2000.0)
    y = 20 + 0.01 * x + rng.normal(0, 0.05, len(x))  # a sloped line with sub-tolerance noise
    y[777] = 2.0  # a one-point peak
    points = np.column_stack([x, y])
    kept = simplify(points, SIMPLIFY_PX)
    assert kept[0] and kept[-1] and kept[777] and kept[776] and kept[778]
    assert kept.sum() < 100  # the straight stretches collapse: over 95 % of 2,000 points dropped
    # every dropped point lies within the tolerance of the segment drawn across it
    index = np.flatnonzero(kept)
    for first, last in zip(index[:-1], index[1:]):
        a, b = points[first], points[last]
        for p in points[first + 1:last]:
            cross = (b[0] - a[0]) * (p[1] - a[1]) - (b[1] - a[1]) * (p[0] - a[0])
            assert abs(cross) / np.hypot(*(b - a)) <= SIMPLIFY_PX + 1e-9


def project_with_traces(make_project):
    files = {"project.yaml": YAML, "links.csv": LINKS}
    for origin, direction in (("Room 1", "ab"), ("Hut 3", "ba")):
        sor = synth_sor([(100.0, 0.3, -50.0), (800.0 if direction == "ab" else 900.0, 0.08, None),
                         (1600.0, 0.3, -48.0)], 1700.0, cable_id="L2", fiber_id="1", origin=origin,
                        nominal_wavelength_nm=1310, wavelength_nm=1310.0, seed=len(direction + origin))
        files[f"otdr/L2-{direction}.sor"] = write_sor(sor)
    return load_project(make_project(files))


def test_trace_figure_is_grayscale_and_marks_every_event(make_project):
    project = project_with_traces(make_project)
    (strand,) = assess_otdr(project).strands
    svg = trace_svg(strand, project.testing.otdr)
    colours = set(re.findall(r'#[0-9a-fA-F]{6}', svg))
    assert all(c[1:3] == c[3:5] == c[5:7] for c in colours)  # grays only: R = G = B
    assert svg.count("<polyline") == 2  # both directions
    assert svg.count('stroke-dasharray="40 20"') == 1  # the mirrored one dashed (drawn at scale 0.1)
    numbers = re.findall(r'font-size="8">(\d+)</text>', svg)
    assert numbers == [str(n) for n in range(1, len(strand.events) + 1)]


def test_link_sheet_shows_the_event_table(make_project):
    project = project_with_traces(make_project)
    judgement = judge_project(project)
    document = build_report(project, judgement, now=datetime(2030, 1, 1, tzinfo=timezone.utc), version="t",
                            otdr=assess_otdr(project))
    html = document.html
    ids = well_formed(html)  # tags balance, every inline SVG parses as XML
    assert len(ids) == len(set(ids))
    assert "OTDR: events along the fiber" in html and "Strand 1, 1310 nm" in html
    assert html.count('class="otdr-trace"') == 1
    # the splice: 0.08 dB both ways, 800 m into the A trace = 700 m past the 100 m launch cord
    # (from B: 900 − 100 = 800 m, mirrored 1500 − 800 = 700 m), judged against 0.30 dB
    # the event table is set as lines of monospaced text (report/text_table.py): one line per event
    rows = re.search(r'<div class="oe-rows">(.*?)</div>', html, re.S)
    assert rows is not None
    lines = rows.group(1).split("\n")
    # one line per event, numbered in order (launch, connection, splice, connection, fiber end)
    assert [line.split()[0] for line in lines] == ["1", "2", "3", "4", "5"]
    row = re.fullmatch(r' *3 +700\xa0m +splice +0\.08 / 0\.08 +0\.08 +.* +0\.30 +pass *', lines[2])
    assert row is not None, lines[2]  # a passed event: plain text, not in a failed row's mark


def test_figure_numbers_are_placed_by_the_advance_of_their_monospaced_face():
    """Tick labels and event numbers are placed letter by letter (their left ends computed from
    MONO_ADVANCE_EM, see otdr_figure.py); the advance is read here from the font file itself
    (DejaVu Sans Mono, found by fontconfig as the PDF renderer finds it): every character a
    number can be written with, in every report language, advances the same."""
    import shutil
    import subprocess

    from fontTools.ttLib import TTFont

    from reportgen.report.otdr_figure import MONO_ADVANCE_EM, NUMERALS

    assert shutil.which("fc-match"), "fontconfig is needed to render the report"
    path = subprocess.run(["fc-match", "--format=%{file}", NUMERALS.split(",")[0]],
                          capture_output=True, text=True, check=True).stdout
    assert path.endswith("DejaVuSansMono.ttf"), path
    font = TTFont(path)
    cmap, metrics = font.getBestCmap(), font["hmtx"]
    # digits, signs, separators of en/de/fr/es (CLDR: "," "." and U+202F in French), no-break space
    advances = {metrics[cmap[ord(ch)]][0] for ch in "0123456789-−+.,\u202f\u00a0"}
    assert advances == {round(MONO_ADVANCE_EM * font["head"].unitsPerEm)}
