"""Audit findings (reportgen/engine/findings.py): each rule planted once, its threshold edge
(just under / just over), its configuration, and clean projects without errors or warnings.

Thresholds are the documented defaults (docs/project-format.md, "Audit findings"), whose
sources are named there: common practice unless said otherwise. Expected numbers are worked
by hand in the comments beside them. Projects are in memory (tests/builders.py), with the
round-number TEST_LIMITS: OM4 2.0 dB/km at 850 nm, connection 0.5 dB.
"""
from __future__ import annotations

import random
from datetime import date

import pytest

from reportgen.engine.applications import assess_project
from reportgen.engine.findings import RULES, find_all
from reportgen.engine.judge import judge_project
from reportgen.model import (
    FiberType,
    Instrument,
    InstrumentKind,
    Plant,
    ReferenceMethod,
    Transceiver,
)
from reportgen.report.messages_findings import FINDING_TEXT, RULE_TEXT, finding_text
from tests.builders import make_link, make_project

TODAY = date(2030, 2, 1)  # the build day of these tests: after every result below
METER = Instrument("PM-1", InstrumentKind.POWER_METER, calibration_due=date(2031, 1, 1))
SOURCE = Instrument("LS-1", InstrumentKind.LIGHT_SOURCE, calibration_due=date(2031, 1, 1))
CORD = Instrument("TC-1", InstrumentKind.TEST_CORD, calibration_due=date(2031, 1, 1))
KIT = (METER, SOURCE, CORD)
USED = ("LS-1", "PM-1", "TC-1")


def find(project, today=TODAY):
    judgement = judge_project(project)
    return find_all(project, judgement, assess_project(project, judgement), today=today)


def found(project, today=TODAY):
    """(rule, severity, link_id) of every finding."""
    return [(f.rule, f.severity.value, f.link_id) for f in find(project, today).items]


def rows(link_id="L1", strands=1, wavelengths=(850,), loss_db=1.0, at="2030-01-15T09:{:02d}",
         **extra):
    """Both directions of every strand and wavelength, one minute apart."""
    out, minute = [], 0
    for strand in range(1, strands + 1):
        for wavelength in wavelengths:
            for direction in ("ab", "ba"):
                out.append(dict(link_id=link_id, strand=strand, wavelength_nm=wavelength,
                                direction=direction, loss_db=loss_db, instrument=USED,
                                tested_at=at.format(minute), **extra))
                minute += 1
    return out


def project_of(result_rows, links=None, **kwargs):
    kwargs.setdefault("instruments", KIT)
    return make_project(links or [make_link("L1", length_m=500.0)], result_rows, **kwargs)


def test_every_rule_has_words_and_a_basis():
    for rule in RULES:
        assert rule.id in FINDING_TEXT and rule.id in RULE_TEXT
        assert all(RULE_TEXT[rule.id])


# ------------------------------------------------------------------ clean projects


def test_a_plain_passing_project_has_no_finding():
    assert found(project_of(rows())) == []


def test_a_realistic_synthetic_project_gives_no_error_or_warning():
    """40 OM4 links, 4 strands, 850/1300 nm both ways, losses with a realistic spread
    (±0.06 dB; common practice for a light source and meter at 0.01 dB resolution),
    references set each morning and every end face inspected."""
    rng = random.Random(11)
    links = [make_link(f"L{n:02d}", length_m=float(40 + 3 * n), strands=4) for n in range(40)]
    result_rows, inspections = [], []
    for n, link in enumerate(links):
        technician = ("A. Tester", "B. Tester")[n % 2]
        minute = 0
        for strand in range(1, 5):
            for wavelength, base in ((850, 1.05), (1300, 0.82)):
                loss = base + 0.004 * n + rng.gauss(0, 0.03)
                for direction in ("ab", "ba"):
                    result_rows.append(dict(
                        link_id=link.link_id, strand=strand, wavelength_nm=wavelength,
                        direction=direction, loss_db=round(loss + rng.gauss(0, 0.03), 2),
                        instrument=USED, technician=technician,
                        tested_at=f"2030-01-{15 + n // 20}T{9 + (n % 20) // 3}:{(n % 3) * 20 + minute:02d}"))
                    minute += 1
            for end in ("a", "b"):
                inspections.append(dict(link_id=link.link_id, strand=strand, end=end,
                                        inspected_at="2030-01-15T07:30"))
    references = [dict(wavelength_nm=w, set_at=f"2030-01-{d}T08:00")
                  for d in (15, 16) for w in (850, 1300)]
    project = project_of(result_rows, links, references=references, inspections=inspections)
    assert [f for f in found(project) if f[1] != "note"] == []


# ------------------------------------------------------------------ calibration


@pytest.mark.parametrize("tested_at, expected", [
    ("2030-01-14T09:00", []),  # on the due date itself: still in calibration
    ("2030-01-15T09:00", [("calibration-overdue", "error", "L1")]),  # the day after
])
def test_calibration_due_date_edge(tested_at, expected):
    meter = Instrument("PM-1", InstrumentKind.POWER_METER, calibration_due=date(2030, 1, 14))
    project = project_of([dict(wavelength_nm=850, direction=d, loss_db=1.0, instrument=USED,
                               tested_at=tested_at) for d in ("ab", "ba")],
                         instruments=(meter, SOURCE, CORD))
    assert found(project) == expected


def test_calibration_overdue_is_one_finding_per_link_with_its_rows():
    meter = Instrument("PM-1", InstrumentKind.POWER_METER, calibration_due=date(2030, 1, 14))
    project = project_of(rows("L1", strands=2) + rows("L2"),
                         [make_link("L1", strands=2), make_link("L2")],
                         instruments=(meter, SOURCE, CORD))
    findings = find(project).items
    assert [(f.rule, f.link_id, len(f.evidence)) for f in findings] == [
        ("calibration-overdue", "L1", 4), ("calibration-overdue", "L2", 2)]
    assert finding_text(findings[1]) == (
        "Used after its calibration due date: PM-1 (due 2030-01-14), for 2 results "
        "(last use 2030-01-15).")


def test_instrument_without_due_date_is_a_project_note():
    meter = Instrument("PM-1", InstrumentKind.POWER_METER)
    assert found(project_of(rows(), instruments=(meter, SOURCE, CORD))) == [
        ("calibration-unknown", "note", None)]


# ------------------------------------------------------------------ chronology


@pytest.mark.parametrize("day, expected", [
    # the build day and the next are accepted: a meter's local time may run ahead of UTC
    # (up to UTC+14, common practice: the time zones in use span UTC-12 to UTC+14)
    ("2030-02-02T23:59", []),
    ("2030-02-03T00:01", [("result-in-future", "error", "L1")]),
    ("2030-12-01T09:00", [("result-in-future", "error", "L1")]),  # ten months ahead
])
def test_result_after_the_build_date(day, expected):
    project = project_of([dict(wavelength_nm=850, direction=d, loss_db=1.0, instrument=USED,
                               tested_at=day) for d in ("ab", "ba")])
    assert found(project) == expected


@pytest.mark.parametrize("started, expected", [
    (date(2030, 1, 15), []),  # tested on the first day of work
    (date(2030, 1, 16), [("result-before-work", "error", "L1")]),
])
def test_result_before_work_started(started, expected):
    assert found(project_of(rows(), work_started=started)) == expected


@pytest.mark.parametrize("period, expected", [
    ((date(2030, 1, 15), date(2030, 1, 15)), []),
    ((date(2030, 1, 16), None), [("result-outside-period", "warning", "L1")]),
    ((None, date(2030, 1, 14)), [("result-outside-period", "warning", "L1")]),
])
def test_result_outside_the_test_period(period, expected):
    assert found(project_of(rows(), period=period)) == expected


def test_a_retest_dated_before_what_it_replaces():
    result_rows = [
        dict(wavelength_nm=850, direction="ab", loss_db=1.2, tested_at="2030-01-16T09:00",
             instrument=USED, source_line=2),
        dict(wavelength_nm=850, direction="ab", loss_db=1.0, tested_at="2030-01-15T09:00",
             instrument=USED, source_line=3),  # below it in the file, a day earlier
        dict(wavelength_nm=850, direction="ba", loss_db=1.0, tested_at="2030-01-16T09:01",
             instrument=USED, source_line=4),
    ]
    findings = find(project_of(result_rows)).items
    assert [(f.rule, f.severity.value, f.link_id) for f in findings] == [
        ("retest-order", "error", "L1")]
    assert [row["line"] for row in findings[0].evidence] == [3]


def test_retests_in_order_give_no_finding():
    result_rows = rows(at="2030-01-15T09:{:02d}") + [
        dict(wavelength_nm=850, direction="ab", loss_db=0.9, tested_at="2030-01-16T08:00",
             instrument=USED)]
    assert found(project_of(result_rows)) == []


@pytest.mark.parametrize("second_loss, expected", [
    (1.0, []),  # the same row twice: harmless
    (1.3, [("ambiguous-retest", "error", "L1")]),
])
def test_two_rows_with_the_same_time(second_loss, expected):
    result_rows = rows() + [dict(wavelength_nm=850, direction="ab", loss_db=second_loss,
                                 tested_at="2030-01-15T09:00", instrument=USED)]
    assert found(project_of(result_rows)) == expected


# ------------------------------------------------------------------ method


def test_reference_method_other_than_required_is_a_project_error():
    project = project_of(rows(), required_method=ReferenceMethod.TWO_CORD)
    assert found(project) == [("reference-method", "error", None)]
    assert found(project_of(rows(), required_method=ReferenceMethod.ONE_CORD)) == []


# ------------------------------------------------------------------ verdicts as findings


def test_application_not_supported_is_an_error_on_its_link():
    # 10GBASE-SR on OM4: at most 2.9 dB channel loss (IEEE 802.3 cl. 52, the application
    # table); 3.5 dB measured on L2 only.
    links = [make_link("L1", length_m=100.0, applications=("10GBASE-SR",)),
             make_link("L2", length_m=100.0, applications=("10GBASE-SR",))]
    project = project_of(rows("L1", loss_db=1.0) + rows("L2", loss_db=3.5), links,
                         audit={"asymmetry_db": 1.0})
    assert ("application-not-supported", "error", "L2") in found(project)
    assert not [f for f in found(project) if f[2] == "L1"]


def _optic(tx_min, tx_max, sensitivity, overload):
    return Transceiver("x", 850, tx_min_dbm=tx_min, tx_max_dbm=tx_max,
                       rx_min_average_dbm=sensitivity, rx_overload_dbm=overload)


def test_transceiver_too_weak_is_an_error():
    # launch -7.3 dBm - 3.0 dB = -10.3 dBm, under the -9.9 dBm receive minimum
    # (10GBASE-SR values of IEEE 802.3 clause 52, as in the demo's catalogue)
    project = project_of(rows(loss_db=3.0), [make_link("L1", length_m=500.0, transceiver="x")],
                         transceivers={"x": _optic(-7.3, -1.0, -9.9, -1.0)})
    assert ("transceiver-too-weak", "error", "L1") in found(project)


def test_transceiver_too_strong_with_a_fitting_attenuator_is_a_warning():
    # launch at most 0 dBm - 1.0 dB = -1.0 dBm, over the -3 dBm overload; a 2 dB
    # attenuator brings it to -3 dBm (invented optic for hand arithmetic)
    project = project_of(rows(loss_db=1.0), [make_link("L1", length_m=500.0, transceiver="x")],
                         transceivers={"x": _optic(-5.0, 0.0, -20.0, -3.0)})
    assert found(project) == [("transceiver-too-strong", "warning", "L1")]


@pytest.mark.parametrize("loss_db, expected", [
    (1.70, []),  # limit 0.5 km × 2.0 + 2 × 0.5 = 2.0 dB: margin 0.30 dB > 0.2 dB
    (1.85, [("within-uncertainty", "warning", "L1")]),  # margin 0.15 dB ≤ 0.2 dB
])
def test_within_uncertainty(loss_db, expected):
    assert found(project_of(rows(loss_db=loss_db), uncertainty_db=0.2)) == expected


# ------------------------------------------------------------------ plausibility


def _pair(ab, ba):
    return [dict(wavelength_nm=850, direction="ab", loss_db=ab, instrument=USED,
                 tested_at="2030-01-15T09:00"),
            dict(wavelength_nm=850, direction="ba", loss_db=ba, instrument=USED,
                 tested_at="2030-01-15T09:01")]


@pytest.mark.parametrize("ba, expected", [
    (1.50, []),  # |1.00 - 1.50| = 0.50 dB: not above the 0.5 dB default
    (1.51, [("direction-asymmetry", "warning", "L1")]),
])
def test_direction_asymmetry_edge(ba, expected):
    assert found(project_of(_pair(1.0, ba))) == expected


def test_direction_asymmetry_threshold_is_configurable():
    assert found(project_of(_pair(1.0, 1.51), audit={"asymmetry_db": 0.6})) == []
    assert found(project_of(_pair(1.0, 1.35), audit={"asymmetry_db": 0.3})) == [
        ("direction-asymmetry", "warning", "L1")]


OUTSIDE_10KM = make_link("L1", fiber_type=FiberType.OS2, plant=Plant.OUTSIDE, length_m=10000.0)


@pytest.mark.parametrize("loss_db, expected", [
    # bound at 1550 nm: 0.7 / 1.55^4 = 0.7 / 5.772 = 0.12128 dB/km × 10 km = 1.2128 dB,
    # + 2 end connections (one-cord) × 0.02 dB = 1.2528 dB (hand arithmetic)
    (1.26, []),
    (1.25, [("implausibly-low-loss", "warning", "L1")]),
])
def test_implausibly_low_loss_edge(loss_db, expected):
    project = project_of(rows(wavelengths=(1550,), loss_db=loss_db), [OUTSIDE_10KM])
    assert found(project) == expected


def test_implausibly_low_loss_allows_the_uncertainty_and_is_configurable():
    low = rows(wavelengths=(1550,), loss_db=1.10)
    assert found(project_of(low, [OUTSIDE_10KM], uncertainty_db=0.2)) == []  # 1.10 ≥ 1.0528
    # with 0.5 dB·µm⁴/km: 0.5 / 5.772 × 10 = 0.8662 + 0.04 = 0.9062 dB ≤ 1.10
    assert found(project_of(low, [OUTSIDE_10KM], audit={"rayleigh_db_um4_per_km": 0.5})) == []
    assert found(project_of(low, [OUTSIDE_10KM])) == [("implausibly-low-loss", "warning", "L1")]


def test_a_meter_referenced_through_the_link_reads_about_zero():
    zero = rows(wavelengths=(1550,), loss_db=0.02)
    assert found(project_of(zero, [OUTSIDE_10KM], uncertainty_db=0.3)) == [
        ("implausibly-low-loss", "warning", "L1")]


@pytest.mark.parametrize("identical, expected", [
    (5, []),
    (6, [("repeated-readings", "warning", "L1")]),  # the default repeat_count
])
def test_repeated_readings_of_one_link(identical, expected):
    link = make_link("L1", length_m=500.0, strands=4)
    result_rows = rows(strands=4)  # 8 rows at 850 nm
    for at, row in enumerate(result_rows):
        row["loss_db"] = 1.23 if at < identical else 1.30 + at / 100
    project = project_of(result_rows, [link], audit={"asymmetry_db": 1.0})
    assert found(project) == expected


def test_repeated_readings_in_a_row_by_one_technician_across_links():
    links = [make_link(f"L{n}", length_m=500.0) for n in range(1, 5)]
    result_rows = []
    for n, link in enumerate(links):
        result_rows += rows(link.link_id, loss_db=1.11, technician="A. Tester",
                            at=f"2030-01-15T1{n}:{{:02d}}")
    findings = find(project_of(result_rows, links)).items
    assert [(f.rule, f.severity.value, f.link_id) for f in findings] == [
        ("repeated-readings", "warning", None)]
    assert len(findings[0].evidence) == 8
    assert finding_text(findings[0]) == (
        "Identical readings of 1.11 dB in a row by A. Tester: 8 results; 6 or more are unlikely.")
    assert found(project_of(result_rows, links, audit={"repeat_count": 9})) == []


@pytest.mark.parametrize("length_m, plant, expected", [
    (0.48, Plant.OUTSIDE, [("length-implausible", "warning", "L1")]),  # km written as m
    (9.9, Plant.OUTSIDE, [("length-implausible", "warning", "L1")]),
    (10.0, Plant.OUTSIDE, []),  # the 10 m default for outside plant
    (0.9, Plant.INSIDE, [("length-implausible", "warning", "L1")]),
    (1.0, Plant.INSIDE, []),  # the 1 m default for inside plant
])
def test_documented_length_implausible(length_m, plant, expected):
    link = make_link("L1", fiber_type=FiberType.OS2, plant=plant, length_m=length_m)
    assert found(project_of(rows(wavelengths=(1310,), loss_db=1.5), [link])) == expected


@pytest.mark.parametrize("measured_m, expected", [
    (555.0, []),  # 500 m documented: 10 % = 50 m + 5 m = 55 m allowed
    (555.5, [("length-mismatch", "warning", "L1")]),
    (444.5, [("length-mismatch", "warning", "L1")]),
])
def test_measured_length_against_documented(measured_m, expected):
    assert found(project_of(rows(measured_length_m=measured_m))) == expected


def test_length_tolerance_is_configurable():
    project = project_of(rows(measured_length_m=520.0),
                         audit={"length_tolerance_percent": 2.0, "length_tolerance_m": 5.0})
    assert found(project) == [("length-mismatch", "warning", "L1")]  # 20 m > 10 + 5 m


# ------------------------------------------------------------------ records


def _referenced(result_rows, references, **kwargs):
    return project_of(result_rows, references=references, **kwargs)


def test_results_tied_to_a_fresh_reference_give_no_finding():
    assert found(_referenced(rows(), [dict(set_at="2030-01-15T08:00")])) == []


def test_no_reference_before_the_result():
    # the only reference was set after the tests (09:00), and another at 1300 nm
    project = _referenced(rows(), [dict(set_at="2030-01-15T10:00"),
                                   dict(wavelength_nm=1300, set_at="2030-01-15T08:00")])
    assert found(project) == [("reference-missing", "warning", "L1")]


@pytest.mark.parametrize("set_at, expected", [
    ("2030-01-14T09:01", []),  # 09:00 and 09:01 the next day: at most 24 h old
    ("2030-01-14T08:59", [("reference-stale", "warning", "L1")]),  # 24 h 1 min
])
def test_reference_age_edge(set_at, expected):
    assert found(_referenced(rows(), [dict(set_at=set_at)])) == expected


def test_reference_age_is_configurable():
    project = _referenced(rows(), [dict(set_at="2030-01-15T06:00")],
                          audit={"reference_max_age_h": 2})
    assert found(project) == [("reference-stale", "warning", "L1")]


@pytest.mark.parametrize("check_db, expected", [
    (0.20, []),  # the 0.2 dB default
    (0.21, [("cords-not-verified", "warning", None)]),
    (None, [("cords-not-verified", "warning", None)]),  # not checked at all
])
def test_test_cord_verification(check_db, expected):
    project = _referenced(rows(), [dict(set_at="2030-01-15T08:00", cord_check_db=check_db)])
    assert found(project) == expected


def test_reference_record_with_another_method():
    project = _referenced(rows(), [dict(set_at="2030-01-15T08:00",
                                        method=ReferenceMethod.THREE_CORD)])
    assert found(project) == [("reference-method", "error", None)]


def _inspected(*inspections, strands=1):
    link = make_link("L1", length_m=500.0, strands=strands)
    return project_of(rows(strands=strands), [link], inspections=list(inspections))


def test_every_end_face_inspected_and_passing():
    assert found(_inspected(dict(end="a"), dict(end="b"))) == []


def test_end_face_without_inspection():
    findings = find(_inspected(dict(end="a"), dict(end="b"), dict(strand=2, end="a"),
                               strands=2)).items
    assert [(f.rule, f.severity.value, f.link_id) for f in findings] == [
        ("inspection-missing", "warning", "L1")]
    assert finding_text(findings[0]) == "No end-face inspection recorded at strand 2 end B."


def test_latest_inspection_failed_is_an_error_and_a_later_pass_clears_it():
    failed = dict(end="b", result="fail", inspected_at="2030-01-15T07:30")
    assert found(_inspected(dict(end="a"), dict(end="b"), failed)) == [
        ("inspection-failed", "error", "L1")]
    cleaned = dict(end="b", inspected_at="2030-01-15T08:00")
    assert found(_inspected(dict(end="a"), failed, cleaned)) == []


def test_empty_record_folders_mean_nothing_was_recorded():
    # a references/ or inspections/ folder without rows: the record rules run and find gaps
    assert found(project_of(rows(), references=[])) == [("reference-missing", "warning", "L1")]
    assert found(project_of(rows(), inspections=[])) == [("inspection-missing", "warning", "L1")]


def test_records_rules_do_not_run_without_records():
    # no references/ and no inspections/ folder: nothing is said about them
    assert found(project_of(rows(), references=None, inspections=None)) == []
