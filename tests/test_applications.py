"""The application table and per-link application verdicts.

Check values come from reference-values §4, each with its source and status next to it:
IEEE 802.3 (clause named), INCITS FC-PI family, ITU-T G.984.2 / G.987.2 / G.9807.1.
Hand-worked cases use the test limit set of tests/builders.py (test inputs, not a standard).
"""
from __future__ import annotations

import dataclasses

import pytest
from hypothesis import given
from hypothesis import strategies as st

from reportgen.engine.applications import assess_link_applications, assess_project
from reportgen.inputs.apptable import (
    DESCRIBE_COLUMNS,
    describe_rows,
    load_applications,
    parse_applications,
    read_applications,
    check_application_ids,
)
from reportgen.model import ApplicationVerdict, ReasonKind
from reportgen.errors import InputError
from reportgen.engine.judge import judge_project
from reportgen.model import FiberType, Transceiver
from reportgen.engine.power import LossRange, judged_loss_ranges
from reportgen.report.messages_apps import reason_text
from tests.builders import make_link, make_project

TABLE = load_applications()
SINGLE_MODE = (FiberType.OS1, FiberType.OS1A, FiberType.OS2)

REQUIRED_IDS = [
    "1000BASE-SX", "1000BASE-LX", "10GBASE-SR", "10GBASE-LR", "10GBASE-ER", "25GBASE-SR",
    "40GBASE-SR4", "40GBASE-LR4", "100GBASE-SR4", "100GBASE-LR4", "400GBASE-SR8",
    "400GBASE-DR4", "8GFC", "16GFC", "32GFC", "PON-A", "PON-B", "PON-B+", "PON-C", "PON-C+",
    "PON-N1", "PON-N2", "PON-E1", "PON-E2",
]


# ------------------------------------------------------------------ the table


def test_table_has_the_trade_names():
    assert list(TABLE.ids) == REQUIRED_IDS


# Every value of the table is typed from its source in tests/test_data_tables.py (and the
# IEEE channel-model and PON-window consistency checks live there too); this module checks
# the reading of the table and the verdicts.


def test_pon_splitter_fits_the_classes():
    # Physics: an ideal 1:32 splitter loses 10·log10(32) = 15.05 dB (reference-values §4),
    # above class B's 10 dB minimum and below class B+'s 28 dB maximum (ITU-T G.984.2,
    # verified, secondary): a 1:32 path fits those classes as the table holds them.
    import math

    split_db = 10 * math.log10(32)
    assert split_db == pytest.approx(15.05, abs=0.005)
    class_b_min_db, class_b_plus_max_db = 10, 28
    assert class_b_min_db < split_db < class_b_plus_max_db
    assert TABLE.get("PON-B").limits_for(FiberType.OS2).min_loss_db == class_b_min_db
    assert TABLE.get("PON-B+").limits_for(FiberType.OS2).max_loss_db == class_b_plus_max_db


def test_every_row_names_its_status_and_every_entry_its_source():
    for entry in TABLE.entries:
        assert entry.source and entry.test_wavelengths_nm and entry.operating_nm
        for row in entry.fibers:
            assert any(word in row.status for word in ("verified", "derived", "from memory"))


def test_single_mode_entries_cover_os1_os1a_os2():
    for entry in TABLE.entries:
        if entry.test_wavelengths_nm[0] >= 1260:
            assert all(entry.limits_for(fiber) is not None for fiber in SINGLE_MODE), entry.id
            assert all(entry.limits_for(f) is None for f in FiberType if f not in SINGLE_MODE)


@pytest.mark.parametrize(("application", "wavelengths"), [
    ("1000BASE-SX", (850,)), ("10GBASE-SR", (850,)), ("10GBASE-LR", (1310,)),
    ("10GBASE-ER", (1550,)), ("40GBASE-LR4", (1310,)), ("16GFC", (850,)),
])
def test_needed_test_wavelengths(application, wavelengths):
    # common practice: the test wavelength nearest the operating one stands for it
    assert TABLE.get(application).test_wavelengths_nm == wavelengths


def test_describe_rows_are_flat_and_complete():
    rows = describe_rows()
    assert all(tuple(row) == DESCRIBE_COLUMNS for row in rows)
    assert {row["id"] for row in rows} == set(REQUIRED_IDS)
    sr_om3 = next(r for r in rows if r["id"] == "10GBASE-SR" and r["fiber_types"] == "OM3")
    assert (sr_om3["max_length_m"], sr_om3["max_loss_db"], sr_om3["source"]) == (
        300, 2.6, "IEEE 802.3 cl. 52")
    assert "verified, secondary" in sr_om3["status"]


def test_broken_table_is_named_precisely():
    data = {"applications": [{"id": "X", "family": "F", "source": "S", "operating_nm": [850],
                              "test_wavelengths_nm": [850], "strands": 2,
                              "fibers": [{"types": ["OM9"], "max_length_m": 1,
                                          "max_loss_db": 1, "status": "from memory"}]}]}
    with pytest.raises(InputError) as caught:
        parse_applications(data, "t.yaml")
    assert [str(problem) for problem in caught.value.problems] == [
        "t.yaml, application X.fibers[0].types: expected a list of fiber types, each one of OM1, OM2, "
        "OM3, OM4, OM5, OS1, OS1a, OS2 (got \"['OM9']\")"]


def test_every_problem_of_a_broken_table_is_named_at_once():
    data = {"applications": [
        {"id": "X", "family": "F", "source": "S", "operating_nm": [85], "test_wavelengths_nm": [850],
         "strands": 2, "fibers": [{"types": ["OM4"], "max_length_m": -1, "max_loss_db": "2,5",
                                   "status": "from memory"}]},
        {"id": "x", "family": "F", "source": "S", "operating_nm": [850], "test_wavelengths_nm": [850],
         "strands": 2.5, "fibers": [{"types": ["OM4"], "max_length_m": 1, "max_loss_db": 1,
                                     "status": "guess"}]},
    ]}
    with pytest.raises(InputError) as caught:
        parse_applications(data, "t.yaml")
    assert [str(problem) for problem in caught.value.problems] == [
        "t.yaml, application X.operating_nm: expected a wavelength in whole nm from 600 to 1700 (got '85')",
        "t.yaml, application X.fibers[0].max_length_m: expected a number ≥ 0 (got '-1')",
        "t.yaml, application X.fibers[0].max_loss_db: expected a number ≥ 0 "
        "(write numbers with a decimal point, not a comma) (got '2,5')",
        "t.yaml, application x.id: expected an id not used before, ignoring case "
        "(applications[0] has it) (got 'x')",
        "t.yaml, application x.strands: expected a whole number of fibers ≥ 1 (got '2.5')",
        "t.yaml, application x.fibers[0].status: expected 'verified, secondary', 'derived' or "
        "'from memory' (got 'guess')",
    ]


def test_application_table_file_with_a_repeated_key_is_refused():
    text = "applications:\n  - {id: X, family: F, source: S, operating_nm: [850], strands: 2,\n" \
           "     test_wavelengths_nm: [850], fibers: [{types: [OM4], max_length_m: 1, max_loss_db: 1,\n" \
           "     status: from memory, max_loss_db: 2}]}\n"
    with pytest.raises(InputError) as caught:
        read_applications(text, "t.yaml")
    assert [str(problem) for problem in caught.value.problems] == [
        "t.yaml, line 4, max_loss_db: expected each key once in its mapping (first given on line 3)"]


# --------------------------------------------------------------- input ids


@pytest.mark.parametrize(("written", "message"), [
    ("10GBASE-XX", "links.csv, line 5, applications: expected an application id such as "
                   "10GBASE-SR (see 'reportgen applications') (got '10GBASE-XX')"),
    ("10gbase-lx", "links.csv, line 5, applications: expected an application id such as "
                   "10GBASE-LR (see 'reportgen applications') (got '10gbase-lx')"),
    ("PON B+", "links.csv, line 5, applications: expected an application id such as "
                   "PON-B+ (see 'reportgen applications') (got 'PON B+')"),
    ("token ring", "links.csv, line 5, applications: expected an application id such as "
                   "10GBASE-SR (see 'reportgen applications') (got 'token ring')"),
])
def test_unknown_application_id_is_refused(written, message):
    link = make_link(applications=("10GBASE-SR", written), line=5)
    assert [str(p) for p in check_application_ids([link])[1]] == [message]


def test_known_application_ids_pass():
    link = make_link(applications=tuple(REQUIRED_IDS))
    assert check_application_ids([link]) == ([link], [])


def test_application_ids_are_matched_ignoring_case():
    # IEEE 802.3 names its PMDs in capitals (10GBASE-SR); written in lower case it is the same PMD
    link = make_link(applications=("10gbase-sr", "pon-b+"), line=5)
    links, problems = check_application_ids([link])
    assert (links[0].applications, problems) == (("10GBASE-SR", "PON-B+"), [])


# --------------------------------------------------------------- assessment


def _ranges(*rows):
    """{wavelength: LossRange} from (wavelength, worst, least)."""
    return {wl: LossRange(worst, least, 2) for wl, worst, least in rows}


def _assess(link, application_id, measured):
    """The assessment of one application listed for ``link``, given its judged losses."""
    listed = dataclasses.replace(link, applications=(application_id,))
    [got] = assess_link_applications(listed, measured, TABLE).assessments
    return got


def _texts(assessment):
    return [reason_text(r) for r in assessment.reasons]


def test_worst_loss_over_strands_and_directions_counts():
    # OM4, 120 m; at 850 nm: s1 ab 1.80, s1 ba 2.10, s2 ab 1.95, s2 ba 1.70 → worst 2.10 dB.
    # 10GBASE-SR (OM4: 400 m, 2.9 dB): 120 ≤ 400, 2.10 ≤ 2.90 → supported.
    # 25GBASE-SR (OM4: 100 m, 1.9 dB): 120 > 100 and 2.10 > 1.90 → not supported, both reasons.
    link = make_link(fiber_type=FiberType.OM4, length_m=120, strands=2,
                     applications=("10GBASE-SR", "25GBASE-SR"))
    results = [dict(wavelength_nm=850, strand=1, direction="ab", loss_db=1.80),
               dict(wavelength_nm=850, strand=1, direction="ba", loss_db=2.10),
               dict(wavelength_nm=850, strand=2, direction="ab", loss_db=1.95),
               dict(wavelength_nm=850, strand=2, direction="ba", loss_db=1.70)]
    judged = judge_project(make_project([link], results)).results
    assessed = assess_link_applications(link, judged_loss_ranges(judged)["L1"], TABLE)
    sr, sr25 = assessed.assessments
    assert sr.to_json(reason_text) == {
        "id": "10GBASE-SR", "verdict": "supported", "max_loss_db": 2.9, "worst_loss_db": 2.1,
        "max_length_m": 400.0, "reasons": [], "end_allowance_db": 0.0,
        "within_uncertainty": False}
    assert sr25.to_json(reason_text) == {
        "id": "25GBASE-SR", "verdict": "not-supported", "max_loss_db": 1.9,
        "worst_loss_db": 2.1, "max_length_m": 100.0,
        "reasons": ["too long: 120 m documented, 100 m allowed on OM4",
                    "too much loss at 850 nm: 2.10 dB measured, 1.90 dB allowed"],
        "end_allowance_db": 0.0, "within_uncertainty": False}
    # capable as measured (OM4, 120 m, 2.10 dB at 850): 1000BASE-SX (550 m, 3.56 dB),
    # 10GBASE-SR (400 m, 2.9 dB); 40GBASE-SR4 is 150 m but 1.5 dB; 8GFC 190 m but 2.19 dB → yes;
    # 16GFC 125 m but 1.95 dB → no.
    assert assessed.capable == ("1000BASE-SX", "10GBASE-SR", "8GFC")


def test_missing_wavelength_is_untested():
    # Only 1300 nm results: 10GBASE-SR needs 850 nm → untested.
    link = make_link(fiber_type=FiberType.OM4, length_m=50)
    got = _assess(link, "10GBASE-SR", _ranges((1300, 0.8, 0.7)))
    assert got.verdict is ApplicationVerdict.UNTESTED
    assert got.worst_loss_db is None
    assert _texts(got) == ["untested at 850 nm: no judged result"]


def test_failure_beats_untested_and_lists_every_reason():
    # PON-B+ (ITU-T G.984.2: 13–28 dB, 20 km) on OS2, 25 km: too long (20 km), 1310 nm least
    # 12.40 < 13 dB minimum, 1490 nm (the downstream wavelength G.984.2 names) missing.
    link = make_link(fiber_type=FiberType.OS2, length_m=25000)
    got = _assess(link, "PON-B+", _ranges((1310, 14.0, 12.4)))
    assert got.verdict is ApplicationVerdict.NOT_SUPPORTED
    assert [r.kind for r in got.reasons] == [ReasonKind.TOO_LONG, ReasonKind.TOO_LITTLE_LOSS,
                                             ReasonKind.UNTESTED]
    assert [(r.wavelength_nm, r.value, r.limit) for r in got.reasons] == [
        (None, 25000, 20000), (1310, 12.4, 13), (1490, None, None)]
    assert _texts(got) == [
        "too long: 25000 m documented, 20000 m allowed on OS2",
        "too little loss at 1310 nm: 12.40 dB measured, class minimum 13.00 dB",
        "untested at 1490 nm: no judged result",
    ]


def test_pon_class_needs_both_wavelengths_within_min_and_max():
    # 1:32 GPON link: 1310 nm 18.69/18.20 dB, 1490 nm 18.10/17.95 dB (worst/least).
    # PON-B+ (ITU-T G.984.2, 13–28 dB): all inside → supported; worst over wavelengths
    # 18.69 dB, least 17.95 dB.
    link = make_link(fiber_type=FiberType.OS2, length_m=1620)
    ranges = _ranges((1310, 18.69, 18.20), (1490, 18.10, 17.95))
    b_plus = _assess(link, "PON-B+", ranges)
    assert (b_plus.verdict, b_plus.worst_loss_db, b_plus.least_loss_db) == (
        ApplicationVerdict.SUPPORTED, 18.69, 17.95)
    assert (b_plus.min_loss_db, b_plus.max_loss_db) == (13, 28)
    # PON-E1 (ITU-T G.987.2, 18–33 dB) is checked at 1270 and 1577 nm: the same losses
    # there, least 17.95 at 1577 < 18 → not supported.
    xg = _ranges((1270, 18.69, 18.20), (1577, 18.10, 17.95))
    e1 = _assess(link, "PON-E1", xg)
    assert e1.verdict is ApplicationVerdict.NOT_SUPPORTED
    assert _texts(e1) == [
        "too little loss at 1577 nm: 17.95 dB measured, class minimum 18.00 dB"]


def test_gpon_class_is_not_judged_on_1550_nm_results():
    # ITU-T G.984.2 names 1310 nm upstream and 1490 nm downstream: results at 1310 and
    # 1550 nm leave the class untested at 1490 nm (1550 nm does not stand in for it).
    link = make_link(fiber_type=FiberType.OS2, length_m=1620)
    got = _assess(link, "PON-B+", _ranges((1310, 18.69, 18.20), (1550, 18.10, 17.95)))
    assert got.verdict is ApplicationVerdict.UNTESTED
    assert _texts(got) == ["untested at 1490 nm: no judged result"]


def test_e1_and_e2_have_no_reach_limit():
    # ITU-T G.987.2 defines E1/E2 by loss only (18–33, 20–35 dB): a 30 km path within the
    # loss window is supported; N1 keeps the 20 km system reach (G.987.1, from memory).
    link = make_link(fiber_type=FiberType.OS2, length_m=30000)
    xg = _ranges((1270, 24.0, 23.0), (1577, 23.5, 22.5))
    e1 = _assess(link, "PON-E1", xg)
    assert (e1.verdict, e1.max_length_m) == (ApplicationVerdict.SUPPORTED, None)
    n1 = _assess(link, "PON-N1", xg)
    assert n1.verdict is ApplicationVerdict.NOT_SUPPORTED
    assert _texts(n1) == ["too long: 30000 m documented, 20000 m allowed on OS2"]


def test_pon_link_is_capable_of_the_classes_its_losses_fit():
    # The 1:32 GPON link above (OS2, 1.62 km; least 17.95 dB, worst 18.69 dB at 1310 and
    # 1490 nm) against every entry. ITU-T G.984.2 A 5–20, B 10–25, B+ 13–28, C 15–30,
    # C+ 17–32 hold 17.95..18.69; the G.987.2 classes need 1270 and 1577 nm (untested). Every
    # single-mode Ethernet entry allows at most 10.9 dB (10GBASE-ER, IEEE 802.3 cl. 52), and
    # the multimode entries do not specify OS2.
    link = make_link(fiber_type=FiberType.OS2, length_m=1620)
    got = assess_link_applications(link, _ranges((1310, 18.69, 18.20), (1490, 18.10, 17.95)),
                                   TABLE)
    assert got.capable == ("PON-A", "PON-B", "PON-B+", "PON-C", "PON-C+")
    # At 1270/1577 nm: G.987.2 N1 14–29 and N2 16–31 hold them; E1 18–33, E2 20–35 do not.
    xg = assess_link_applications(link, _ranges((1270, 18.69, 18.20), (1577, 18.10, 17.95)),
                                  TABLE)
    assert xg.capable == ("PON-N1", "PON-N2")


def test_fiber_type_not_specified():
    link = make_link(fiber_type=FiberType.OS2, length_m=100)
    got = _assess(link, "10GBASE-SR", _ranges((1310, 0.5, 0.4)))
    assert got.to_json(reason_text) == {
        "id": "10GBASE-SR", "verdict": "not-supported", "max_loss_db": None,
        "worst_loss_db": None, "max_length_m": None,
        "reasons": ["fiber type OS2 not specified for 10GBASE-SR"], "end_allowance_db": 0.0,
        "within_uncertainty": False}


def test_exactly_at_the_limits_is_supported():
    # 400 m and 2.9 dB on OM4 are the 10GBASE-SR maxima (IEEE 802.3 cl. 52, verified,
    # secondary); 0.4·3.5 + 1.5 computed in floats is 2.9000000000000004.
    link = make_link(fiber_type=FiberType.OM4, length_m=400)
    got = _assess(link, "10GBASE-SR", _ranges((850, 0.4 * 3.5 + 1.5, 2.0)))
    assert got.verdict is ApplicationVerdict.SUPPORTED
    # 0.01 dB more is over (the float allowance is far smaller than the meters' resolution)
    over = _assess(link, "10GBASE-SR", _ranges((850, 2.91, 2.0)))
    assert over.verdict is ApplicationVerdict.NOT_SUPPORTED


@given(st.floats(min_value=0.0, max_value=5.0), st.floats(min_value=1.0, max_value=600.0))
def test_single_wavelength_verdict_is_the_two_comparisons(worst_db, length_m):
    link = make_link(fiber_type=FiberType.OM3, length_m=length_m)
    got = assess_link_applications(link, _ranges((850, worst_db, worst_db)), TABLE)
    # IEEE 802.3 cl. 52 on OM3: 300 m, 2.6 dB (verified, secondary)
    expected = worst_db <= 2.6 + 1e-9 and length_m <= 300 + 1e-9
    assert ("10GBASE-SR" in got.capable) == expected


# ------------------------------------------------------------------ project


def test_project_outputs_and_matrix():
    # L1: OM4 38 m, 850 nm 1.02 dB, 1300 nm 0.70 dB, with a 10GBASE-SR optic (cl. 52 values):
    #   rx_min = −7.3 − 1.02 = −8.32 dBm, rx_max = −1.0 − 1.02 = −2.02 dBm → ok.
    # L2: OS2 460 m, no results, listed 10GBASE-LR → untested, no transceiver.
    sr = Transceiver("sr-10g", 850, -7.3, -1.0, -9.9, -1.0)
    l1 = make_link("L1", fiber_type=FiberType.OM4, length_m=38,
                   applications=("10GBASE-SR",), transceiver="sr-10g")
    l2 = make_link("L2", fiber_type=FiberType.OS2, length_m=460, applications=("10GBASE-LR",))
    project = make_project([l1, l2], [dict(link_id="L1", wavelength_nm=850, loss_db=1.02),
                                      dict(link_id="L1", wavelength_nm=1300, loss_db=0.70)],
                           transceivers={"sr-10g": sr})
    assessed = assess_project(project, judge_project(project))
    first = assessed.link_json("L1", reason_text)
    assert first["applications"][0]["verdict"] == "supported"
    assert "40GBASE-SR4" in first["capable"] and "10GBASE-LR" not in first["capable"]
    assert first["power"] == {"transceiver": "sr-10g", "basis": "measured", "wavelength_nm": 850,
                              "rx_min_dbm": -8.32, "rx_max_dbm": -2.02, "low_margin_db": 1.58,
                              "high_margin_db": 1.02, "attenuator_db": None, "verdict": "ok",
                              "end_allowance_db": 0.0}
    second = assessed.link_json("L2", reason_text)
    assert second == {"applications": [{
        "id": "10GBASE-LR", "verdict": "untested", "max_loss_db": 6.2, "worst_loss_db": None,
        "max_length_m": 10000.0, "reasons": ["untested at 1310 nm: no judged result"],
        "end_allowance_db": 0.0, "within_uncertainty": False}],
        "capable": [], "power": None}
    matrix = assessed.matrix()
    assert matrix["applications"][:2] == ["1000BASE-SX", "10GBASE-SR"]
    assert "10GBASE-LR" in matrix["applications"]  # listed by L2
    row = matrix["links"][1]
    cell = next(c for c in row["cells"] if c["id"] == "10GBASE-LR")
    assert row["link_id"] == "L2" and cell == {"id": "10GBASE-LR", "verdict": "untested",
                                               "listed": True}
    assert assessed.matrix(["PON-B+"]) == {"applications": ["PON-B+"], "links": [
        {"link_id": "L1", "cells": [{"id": "PON-B+", "verdict": "not-supported", "listed": False}]},
        {"link_id": "L2", "cells": [{"id": "PON-B+", "verdict": "untested", "listed": False}]}]}


def test_matrix_cells_of_a_hand_worked_project():
    # M1: OM3, 250 m, 850 nm worst 2.40 dB. IEEE 802.3 cl. 52 10GBASE-SR on OM3: 300 m,
    # 2.6 dB → supported; cl. 86 40GBASE-SR4 on OM3: 100 m (verified), 1.9 dB (from memory)
    # → too long and too much loss; cl. 52 10GBASE-LR does not specify OM3 → not supported.
    # M2: OS2, 8 km, no 1310 nm result: 10GBASE-LR (10 km, 6.2 dB) → untested.
    m1 = make_link("M1", fiber_type=FiberType.OM3, length_m=250, applications=("40GBASE-SR4",))
    m2 = make_link("M2", fiber_type=FiberType.OS2, length_m=8000)
    project = make_project([m1, m2], [dict(link_id="M1", wavelength_nm=850, loss_db=2.40)])
    assessed = assess_project(project, judge_project(project))
    matrix = assessed.matrix(["10GBASE-SR", "40GBASE-SR4", "10GBASE-LR"])
    assert [[(c["verdict"], c["listed"]) for c in row["cells"]] for row in matrix["links"]] == [
        [("supported", False), ("not-supported", True), ("not-supported", False)],
        [("not-supported", False), ("not-supported", False), ("untested", False)]]
    [listed] = assessed.for_link("M1").assessments
    assert _texts(listed) == ["too long: 250 m documented, 100 m allowed on OM3",
                              "too much loss at 850 nm: 2.40 dB measured, 1.90 dB allowed"]


def test_results_are_frozen():
    link = make_link(fiber_type=FiberType.OM4, length_m=50)
    got = _assess(link, "10GBASE-SR", _ranges((850, 1.0, 1.0)))
    with pytest.raises(dataclasses.FrozenInstanceError):
        got.verdict = ApplicationVerdict.UNTESTED  # type: ignore[misc]


def test_repeated_link_ids_read_the_losses_of_that_id():
    # Not after validation (ids are unique), but each link keeps its own fiber type:
    # OM4 50 m at 1.0 dB fits 10GBASE-SR (IEEE 802.3 cl. 52: 400 m, 2.9 dB); the OS2 twin
    # has no 1310/1550 nm result and 10GBASE-SR does not specify OS2 → nothing capable.
    a = make_link("L1", fiber_type=FiberType.OM4, length_m=50)
    b = make_link("L1", fiber_type=FiberType.OS2, length_m=50)
    project = make_project([a, b], [dict(link_id="L1", wavelength_nm=850, loss_db=1.0)])
    judgement = judge_project(make_project([a], [dict(link_id="L1", wavelength_nm=850,
                                                      loss_db=1.0)]))
    got = assess_project(project, judgement)
    assert "10GBASE-SR" in got.links[0].capable and got.links[1].capable == ()
