"""The report's applications and transceiver power sections: sheets, matrix, appendix, parts."""
from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from datetime import datetime
from pathlib import Path

import pytest

from builders import make_link, make_project, well_formed
from reportgen.report import messages
from reportgen.report import view_apps
from reportgen.engine.applications import assess_project
from reportgen.engine.judge import judge_project
from reportgen.model import FiberType, Transceiver
from reportgen.report.render import build_report
from reportgen.inputs.project import load_project
from reportgen.report.link_views import link_anchors

NOW = datetime(2030, 2, 1, 12, 0)
DEMO = Path(__file__).resolve().parent.parent / "demo_project"
HOSTILE = "<b>optic</b>"

# IEEE 802.3 clause 52 average launch and receive powers of 10GBASE-SR and 10GBASE-ER
# (informative acceptance values; verified, secondary — reference-values §5).
SR = Transceiver("sr", 850, tx_min_dbm=-7.3, tx_max_dbm=-1.0, rx_min_average_dbm=-9.9,
                 rx_overload_dbm=-1.0, description=HOSTILE)
ER = Transceiver("er", 1550, tx_min_dbm=-4.7, tx_max_dbm=4.0, rx_min_average_dbm=-15.8,
                 rx_overload_dbm=-1.0, description="10GBASE-ER optic")


def both_ways(link_id: str, wavelength_nm: int, loss_db: float) -> list[dict]:
    return [dict(link_id=link_id, wavelength_nm=wavelength_nm, direction=d, loss_db=loss_db)
            for d in ("ab", "ba")]


def hand_project():
    """Four links; losses are invented test inputs, limits from the application table."""
    links = [
        make_link("SR-FINE", length_m=100.0, applications=("10GBASE-SR",), transceiver="sr"),
        make_link("SR-WEAK", length_m=450.0, applications=("10GBASE-SR",), transceiver="sr"),
        make_link("ER-HOT", fiber_type=FiberType.OS2, length_m=300.0,
                  applications=("10GBASE-ER",), transceiver="er"),
        make_link("NO-TRX", length_m=100.0, applications=("10GBASE-SR", "40GBASE-SR4")),
    ]
    results = (both_ways("SR-FINE", 850, 1.0) + both_ways("SR-FINE", 1300, 1.0)
               + both_ways("SR-WEAK", 850, 3.2) + both_ways("SR-WEAK", 1300, 1.5)
               + both_ways("ER-HOT", 1310, 0.6) + both_ways("ER-HOT", 1550, 0.5)
               + both_ways("NO-TRX", 1300, 1.0))
    return make_project(links, results, transceivers={"sr": SR, "er": ER})


def render(project):
    judgement = judge_project(project)
    return build_report(project, judgement, now=NOW, version="9.9-test",
                        applications=assess_project(project, judgement))


def sheet(html: str, link_id: str) -> str:
    anchor = link_anchors([link_id])[link_id]
    return html.split(f'id="{anchor}"')[1].split("</section>")[0]


def block(sheet_html: str, heading_key: str) -> str:
    """The sheet's text from the heading ``heading_key`` on."""
    heading = messages.TEXT[heading_key]
    assert heading in sheet_html
    return sheet_html.split(heading, 1)[1]


def tag(verdict: str) -> str:
    return f"&#8202;{verdict}</span>"


@pytest.fixture(scope="module")
def hand_doc():
    return render(hand_project())


def test_verdict_words_and_reasons_on_the_sheets(hand_doc):
    html = hand_doc.html
    well_formed(html)
    # IEEE 802.3 cl. 52, 10GBASE-SR on OM4: 400 m and 2.9 dB channel loss (verified,
    # secondary — reference-values §4). 100 m and 1.00 dB meet both.
    fine = block(sheet(html, "SR-FINE"), "link_apps_heading")
    assert tag("supported") in fine and ">2.90<" in fine and ">1.00<" in fine
    # 450 m > 400 m and 3.20 dB > 2.90 dB: both reasons, worded by Reason.text().
    weak = block(sheet(html, "SR-WEAK"), "link_apps_heading")
    assert tag("not-supported") in weak
    assert "too long: 450 m documented, 400 m allowed on OM4" in weak
    assert "too much loss at 850 nm: 3.20 dB measured, 2.90 dB allowed" in weak
    # No 850 nm result at all: untested, with its reason.
    untested = block(sheet(html, "NO-TRX"), "link_apps_heading")
    assert untested.count(tag("untested")) == 2
    assert "untested at 850 nm: no judged result" in untested
    # The capable list: 1.00 dB at 850 nm on 100 m of OM4 meets 10GBASE-SR.
    assert messages.TEXT["apps_capable_label"] in fine and "10GBASE-SR</span>" in fine


def test_power_verdicts_numbers_and_attenuator(hand_doc):
    html = hand_doc.html
    # Received power = launched power − loss (common practice; reference-values §7).
    # SR-FINE: −7.3 − 1.0 = −8.30 and −1.0 − 1.0 = −2.00 dBm, inside −9.9…−1.0: ok.
    fine = block(sheet(html, "SR-FINE"), "power_heading")
    assert tag("ok") in fine and "-8.30 to -2.00 dBm" in fine
    assert ">1.60</span> dB" in fine and ">1.00</span> dB" in fine  # margin, headroom
    # SR-WEAK: −7.3 − 3.2 = −10.50 dBm, 0.60 dB under the −9.9 dBm receive minimum.
    weak = block(sheet(html, "SR-WEAK"), "power_heading")
    assert tag("too-weak") in weak and "0.60 dB below the receive minimum" in weak
    assert messages.TEXT["power_attenuator_label"] not in weak
    # ER-HOT at 1550 nm: 4.0 − 0.5 = +3.50 dBm, 4.50 dB over the −1.0 dBm overload; the
    # smallest of 1, 2, 3, 5 … dB (the default list) that is ≥ 4.50 is 5 dB, and then
    # −4.7 − 0.5 − 5 = −10.20 ≥ −15.8 (hand-worked).
    hot = block(sheet(html, "ER-HOT"), "power_heading")
    assert tag("too-strong") in hot
    assert "Fit a 5.00 dB attenuator" in hot and "<strong>5.00 dB</strong>" in hot
    assert "-10.20 to -1.50 dBm" in hot


def test_level_diagram_is_embedded_and_parses(hand_doc):
    hot = block(sheet(hand_doc.html, "ER-HOT"), "power_heading")
    svgs = re.findall(r"<svg\b.*?</svg>", hot, flags=re.S)
    assert len(svgs) == 1
    root = ET.fromstring(svgs[0])
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert "1550 nm" in "".join(root.itertext())


def test_no_power_block_without_a_transceiver(hand_doc):
    no_trx = sheet(hand_doc.html, "NO-TRX")
    assert messages.TEXT["power_heading"] not in no_trx
    assert "<svg" not in no_trx.split(messages.TEXT["link_apps_heading"], 1)[1]


def test_transceiver_description_is_escaped(hand_doc):
    assert HOSTILE not in hand_doc.html and "&lt;b&gt;optic&lt;/b&gt;" in hand_doc.html


def front_matter(doc) -> str:
    """The whole front matter, each of its PDF parts checked to be well-formed."""
    parts = doc.front_matter()
    for part in parts:
        well_formed(part)
    return "\n".join(parts)


def test_project_section_matrix_and_power_list_in_the_front(hand_doc):
    front = front_matter(hand_doc)
    section = front.split('id="applications"')[1].split("</section>")[0]
    assert 'data-bookmark="' + messages.TEXT["apps_heading"] in front
    assert '<a href="#applications">' in front  # contents entry
    # Power list: problems first (too-weak, then too-strong), ok last.
    order = [section.index(f'href="#{a}"') for a in ("link-sr-weak", "link-er-hot", "link-sr-fine")]
    assert order == sorted(order)
    # One matrix per fiber type; listed cells distinguished from merely capable ones.
    assert messages.msg("matrix_group", fiber_type="OM4") in section
    assert messages.msg("matrix_group", fiber_type="OS2") in section
    assert 'class="cell listed c-supported"' in section
    assert 'class="cell listed c-not-supported"' in section
    assert 'class="cell listed c-untested"' in section
    assert 'class="cell capable c-supported"' in section
    # The applications part does not exist separately for a small project: it is in
    # the front matter's piece with the register.
    assert all('id="applications"' not in body
               for body in hand_doc.bodies[hand_doc.front_bodies:])
    assert 'id="applications"' in hand_doc.bodies[1] and 'id="register"' in hand_doc.bodies[1]


def test_appendix_names_rules_and_sources(hand_doc):
    appendix = hand_doc.bodies[-1]
    section = appendix.split('id="appx-applications"')[1].split("</section>")[0]
    assert "tx_min \u2212 (worst loss + end allowance), tx_max \u2212 least" in section
    assert "IEEE 802.3 cl. 52" in section and "10GBASE-SR" in section
    assert "1.00, 2.00, 3.00, 5.00" in section  # the attenuators on offer
    # Only the fiber types in use: the OM1 row of 10GBASE-SR is not shown.
    assert ">OM1<" not in section


def test_large_project_gets_a_part_of_its_own(monkeypatch):
    monkeypatch.setattr(view_apps, "FRONT_MATRIX_MAX_LINKS", 2)
    doc = render(hand_project())
    assert 'id="applications"' not in front_matter(doc)
    parts = [body for body in doc.bodies if 'class="apps-section' in body]
    # just before the appendix (a built project has one more part after it: the list of
    # its input files; this one was made in memory)
    assert 'id="appendix"' in doc.bodies[-1]
    # the power list, then the matrix in parts of its own (reportgen.report.matrix_pages)
    assert len(parts) == 2 and doc.bodies[-3:-1] == parts
    assert 'id="applications" data-bookmark=' in parts[0]
    assert messages.TEXT["matrix_heading"] not in parts[0]
    assert messages.TEXT["matrix_heading"] in parts[1] and 'class="grid matrix"' in parts[1]
    for part in doc.bodies:
        well_formed(part)
    assert '<a href="#applications">' in front_matter(doc)


def test_demo_project_power_verdicts():
    # Values from the hand-worked examples in docs/project-format.md §9: CB-02 carries a
    # 10GBASE-ER optic over 0.58-0.61 dB, too strong by 4.42 dB, 5 dB attenuator;
    # A-BB-11 carries 10GBASE-SR over up to 3.12 dB, 0.52 dB under the receive minimum.
    doc = render(load_project(DEMO))
    cb02 = block(sheet(doc.html, "CB-02"), "power_heading")
    assert tag("too-strong") in cb02 and "4.42 dB above the overload level" in cb02
    assert "<strong>5.00 dB</strong>" in cb02
    abb11 = block(sheet(doc.html, "A-BB-11"), "power_heading")
    assert tag("too-weak") in abb11 and "0.52 dB below the receive minimum" in abb11
    # §9 again: A-BB-11 exceeds the 10GBASE-SR channel loss for OM4 (2.9 dB).
    apps = block(sheet(doc.html, "A-BB-11"), "link_apps_heading")
    assert "too much loss at 850 nm: 3.12 dB measured, 2.90 dB allowed" in apps


def test_long_power_list_keeps_only_the_links_needing_action(monkeypatch):
    monkeypatch.setattr(view_apps, "POWER_LIST_ALL_MAX", 2)
    front = front_matter(render(hand_project()))
    section = front.split('id="applications"')[1].split("</section>")[0]
    listing = section.split(messages.TEXT["matrix_heading"])[0]
    assert 'href="#link-sr-weak"' in listing and 'href="#link-er-hot"' in listing
    assert 'href="#link-sr-fine"' not in listing  # ok: counted, not listed
    assert messages.Words().plural("power_list_ok_unlisted", 1, count=1) in listing
