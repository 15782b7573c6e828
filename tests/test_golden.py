"""Golden file: the report.html of a small fixture project equals a reviewed copy.

tests/fixtures/small_project/ is an invented project of four links: two pass, one fails
(R-02 strand 2 at 850 nm) and one is incomplete (Y-02 lacks 1550 nm). Its report.html is
made by the real build with a fixed clock and version; the PDF step is replaced by a stub
(HTML only). The charts' images (matplotlib's SVG, base64 in the page; its bytes change
with matplotlib's version, and tests/test_diagrams.py checks them) are replaced by a
placeholder; everything else must equal tests/golden/small_project.html byte for byte, a
file a person has read and found right. When the report changes on purpose, rewrite it with

    python -m pytest -q tests/test_golden.py --update-golden

then review ``git diff tests/golden/`` before committing it.
"""
from __future__ import annotations

import re
from datetime import datetime, timezone
from pathlib import Path

from reportgen import pipeline
from reportgen.pdf import engine

FIXTURE = Path(__file__).resolve().parent / "fixtures" / "small_project"
NOW = datetime(2030, 2, 1, 12, 0, tzinfo=timezone.utc)
VERSION = "0.0.0-golden"
CHART_IMAGE = re.compile(r'src="data:image/svg\+xml;base64,[A-Za-z0-9+/=]+"')


def test_small_project_report_html_equals_the_reviewed_file(golden, monkeypatch, tmp_path):
    monkeypatch.setattr(engine, "render_pdf", lambda *args, **kwargs: b"%PDF-1.7 stub")
    result = pipeline.build(FIXTURE, tmp_path / "out", now=NOW, version=VERSION)
    assert result.outcome.judgement.totals == {"links": 4, "pass": 2, "fail": 1,
                                               "incomplete": 1}
    html = (tmp_path / "out" / "report.html").read_text(encoding="utf-8")
    assert str(tmp_path) not in html and str(FIXTURE) not in html  # no machine's paths
    charts_left_out = CHART_IMAGE.sub('src="data:image/svg+xml;base64,(chart)"', html)
    assert charts_left_out != html
    golden("small_project.html", charts_left_out)
