"""Application and power checks as a standards-savvy engineer works them by hand.

Sources of the check values, beside each case:
- reference methods: IEC 61280-4-1 / 61280-4-2 (reference-values §3, verified in public
  descriptions): a two-cord result leaves one end connection out, a three-cord result both;
- 0.75 dB per mated connector pair: ANSI/TIA-568.3-D and ISO/IEC 11801-1 (reference-values §2,
  verified, secondary);
- 10GBASE-SR on OM4: 400 m, 2.9 dB (IEEE 802.3 cl. 52, reference-values §4, verified,
  secondary; an engineered link);
- 10GBASE-SR optic: launch min −7.3 dBm, launch max −1.0 dBm, average receive power min −9.9 dBm,
  overload −1.0 dBm (IEEE 802.3 Table 52-6/52-7 values in reference-values §5, verified,
  secondary);
- PON class B+: 13–28 dB (ITU-T G.984.2 Amd. 1; max verified, secondary; min from memory),
  checked at 1310 and 1490 nm (the upstream and downstream wavelengths of G.984.2, from memory).
Limits for the cabling itself are tests/builders.py's round test numbers, not a standard.
"""
from __future__ import annotations

import dataclasses

import pytest

from reportgen.engine.applications import assess_project
from reportgen.engine.judge import judge_project
from reportgen.errors import InputError
from reportgen.inputs.project import load_project
from reportgen.model import (
    ApplicationVerdict,
    Component,
    FiberType,
    LinkVerdict,
    Plant,
    ReferenceMethod,
    ResultFlag,
    Transceiver,
)
from reportgen.report.messages_apps import reason_text
from tests.builders import TEST_LIMITS, make_link, make_project

# 0.75 dB per mated connector pair (TIA-568.3-D / ISO/IEC 11801-1, verified, secondary)
LIMITS = dataclasses.replace(TEST_LIMITS, connection_db=0.75)
# IEEE 802.3 cl. 52, 10GBASE-SR: tx −7.3..−1.0 dBm, rx min (average) −9.9 dBm, overload −1.0
SR = Transceiver("sr", 850, tx_min_dbm=-7.3, tx_max_dbm=-1.0, rx_min_average_dbm=-9.9,
                 rx_overload_dbm=-1.0)


def _sr_link(**fields):
    return make_link(fiber_type=FiberType.OM4, length_m=150, applications=("10GBASE-SR",),
                     **fields)


def _assess(links, rows, method, **options):
    project = make_project(links, rows, limits=LIMITS, method=method, **options)
    return assess_project(project, judge_project(project))


@pytest.mark.parametrize(("method", "loss_db", "verdict", "checked"), [
    # one-cord: both end connections measured; 2.30 ≤ 2.9 → supported
    (ReferenceMethod.ONE_CORD, 2.30, ApplicationVerdict.SUPPORTED, 2.30),
    # two-cord: 2.30 + 1 × 0.75 = 3.05 > 2.9 → not supported
    (ReferenceMethod.TWO_CORD, 2.30, ApplicationVerdict.NOT_SUPPORTED, 3.05),
    # three-cord: 1.50 + 2 × 0.75 = 3.00 > 2.9 → not supported
    (ReferenceMethod.THREE_CORD, 1.50, ApplicationVerdict.NOT_SUPPORTED, 3.00),
    # three-cord: 1.30 + 1.50 = 2.80 ≤ 2.9 → supported
    (ReferenceMethod.THREE_CORD, 1.30, ApplicationVerdict.SUPPORTED, 2.80),
], ids=["one-cord 2.30", "two-cord 2.30+0.75", "three-cord 1.50+1.50", "three-cord 1.30+1.50"])
def test_left_out_end_connections_are_added_before_the_channel_maximum(
        method, loss_db, verdict, checked):
    assessed = _assess([_sr_link()], [dict(wavelength_nm=850, loss_db=loss_db)], method)
    [application] = assessed.for_link("L1").assessments
    assert application.verdict is verdict
    assert application.worst_loss_db == pytest.approx(loss_db)  # the measured loss is kept
    assert application.checked_loss_db == pytest.approx(checked)


def test_the_added_term_is_in_the_reasons_and_summary():
    assessed = _assess([_sr_link()], [dict(wavelength_nm=850, loss_db=2.30)],
                       ReferenceMethod.TWO_CORD)
    [application] = assessed.link_json("L1", reason_text)["applications"]
    assert application["end_allowance_db"] == 0.75
    assert application["reasons"] == [
        "too much loss at 850 nm: 2.30 dB measured + 0.75 dB for the end connections the "
        "reference left out = 3.05 dB, 2.90 dB allowed"]


def test_pon_minimum_uses_the_measured_loss_and_maximum_adds_the_allowance():
    # B+ 13–28 dB. Two-cord: least 13.20 dB stays 13.20 ≥ 13 (min side as measured);
    # worst 27.50 + 0.75 = 28.25 > 28 → not supported, for too much loss only.
    link = make_link(fiber_type=FiberType.OS2, plant=Plant.OUTSIDE, length_m=1620,
                     applications=("PON-B+",))
    rows = [dict(wavelength_nm=1310, direction="ab", loss_db=27.50),
            dict(wavelength_nm=1490, direction="ab", loss_db=13.20)]
    assessed = _assess([link], rows, ReferenceMethod.TWO_CORD)
    [application] = assessed.for_link("L1").assessments
    assert application.verdict is ApplicationVerdict.NOT_SUPPORTED
    assert [r.kind.value for r in application.reasons] == ["too-much-loss"]
    assert application.least_loss_db == pytest.approx(13.20)


def test_power_weak_side_adds_the_allowance_and_strong_side_does_not():
    # Two-cord, 850 nm losses 2.30 (worst) and 1.80 (least):
    # rx_min = −7.3 − (2.30 + 0.75) = −10.35 dBm < −9.9 → too weak by 0.45 dB;
    # rx_max = −1.0 − 1.80 = −2.80 dBm (as measured).
    rows = [dict(wavelength_nm=850, direction="ab", loss_db=2.30),
            dict(wavelength_nm=850, direction="ba", loss_db=1.80)]
    assessed = _assess([_sr_link(transceiver="sr")], rows, ReferenceMethod.TWO_CORD,
                       transceivers={"sr": SR})
    power = assessed.power["L1"]
    assert power.rx_min_dbm == pytest.approx(-10.35)
    assert power.rx_max_dbm == pytest.approx(-2.80)
    assert power.low_margin_db == pytest.approx(-0.45)
    assert power.verdict.value == "too-weak"
    assert power.to_json()["end_allowance_db"] == 0.75


def test_transceiver_window_and_application_allowance_differences_are_named():
    # 10GBASE-SR on OM4 allows 2.9 dB; the optic's window is −7.3 − (−9.9) = 2.6 dB.
    assessed = _assess([_sr_link(transceiver="sr")], [dict(wavelength_nm=850, loss_db=2.75)],
                       ReferenceMethod.ONE_CORD, transceivers={"sr": SR})
    assert assessed.for_link("L1").assessments[0].verdict is ApplicationVerdict.SUPPORTED
    assert assessed.power["L1"].verdict.value == "too-weak"  # −7.3 − 2.75 = −10.05 < −9.9
    [(application, channel_db, window_db)] = assessed.transceiver_differences("L1")
    assert (application, channel_db) == ("10GBASE-SR", 2.9)
    assert window_db == pytest.approx(2.6)


@pytest.mark.parametrize(("loss_db", "within"), [
    (2.75, True),    # 2.9 − 2.75 = 0.15 ≤ 0.2
    (3.05, True),    # over by 0.15: not supported, still within uncertainty
    (2.60, False),   # 0.30 > 0.2
])
def test_application_within_uncertainty_of_the_channel_limit(loss_db, within):
    assessed = _assess([_sr_link()], [dict(wavelength_nm=850, loss_db=loss_db)],
                       ReferenceMethod.ONE_CORD, uncertainty_db=0.2)
    [application] = assessed.for_link("L1").assessments
    assert application.within_uncertainty is within


def test_every_negative_reading_is_flagged():
    # −0.10 with uncertainty 0.2 is judged (not invalid) but still flagged; −0.35 is invalid.
    rows = [dict(wavelength_nm=850, direction="ab", loss_db=-0.10),
            dict(wavelength_nm=850, direction="ba", loss_db=-0.35),
            dict(wavelength_nm=1300, direction="ab", loss_db=0.0)]
    judged = judge_project(make_project([make_link()], rows, uncertainty_db=0.2)).results
    assert list(judged["verdict"]) == ["pass", "invalid", "pass"]
    assert [ResultFlag.NEGATIVE_LOSS in flags for flags in judged["flags"]] == [True, True, False]


def test_a_pon_wavelength_without_a_cabling_limit_is_shown_not_judged_and_counted():
    # OS2 outside plant: the test limit set defines 1310 and 1550 nm only. 1490 nm is
    # needed by PON-B+ (G.984.2 downstream): not judged against the cabling limit, flagged,
    # counted for the class.
    # A 17.0 dB splitter (test input): limits 0.2 × 1.62 + 2 × 0.75 + 17.0 = 18.82 dB at
    # 1310 nm and 0.1 × 1.62 + 1.5 + 17.0 = 18.66 dB at 1550 nm (test limit set's outside table).
    link = make_link(fiber_type=FiberType.OS2, plant=Plant.OUTSIDE, length_m=1620,
                     applications=("PON-B+",), components=("split",))
    rows = [dict(wavelength_nm=w, direction=d, loss_db=loss)
            for w, loss in ((1310, 18.7), (1550, 18.1), (1490, 18.3)) for d in ("ab", "ba")]
    project = make_project([link], rows, limits=LIMITS,
                           components={"split": Component("split", 17.0)})
    judgement = judge_project(project)
    at_1490 = judgement.results[judgement.results["wavelength_nm"] == 1490]
    assert set(at_1490["verdict"]) == {"not-judged"}
    assert all(ResultFlag.NO_CABLING_LIMIT in flags for flags in at_1490["flags"])
    assert not at_1490["judged"].any() and at_1490["counted"].all()
    assert judgement.links[0].verdict is LinkVerdict.PASS  # 1310 and 1550 judged and pass
    assert judgement.links[0].judged == 4
    [application] = assess_project(project, judgement).for_link("L1").assessments
    assert application.verdict is ApplicationVerdict.SUPPORTED


PON_YAML = ("project:\n  title: T\n  contractor: {name: C}\n"
            "testing:\n  limits: tia-568.3-d\n  reference_method: one-cord\n")


def test_results_at_1490_nm_are_accepted_only_for_a_link_that_needs_them(make_project):
    root = make_project({
        "project.yaml": PON_YAML,
        "links.csv": ("link_id,end_a,end_b,fiber_type,plant,length_m,applications\n"
                      "P1,OLT,ONT 1,OS2,outside,1620,PON-B+\n"
                      "S1,OLT,Hut,OS2,outside,900,\n"),
        "results/day1.csv": ("link_id,wavelength_nm,loss_db,tested_at\n"
                             "P1,1490,18.30,2030-01-15\n"
                             "S1,1490,1.20,2030-01-15\n"),
    })
    with pytest.raises(InputError) as caught:
        load_project(root)
    messages = [str(problem) for problem in caught.value.problems]
    assert messages == ["results/day1.csv, line 3, wavelength_nm: expected one of 1310, 1383, "
                        "1550 for OS2, outside plant (got '1490')"]


def test_a_1490_nm_result_loads_for_a_gpon_link(make_project):
    root = make_project({
        "project.yaml": PON_YAML,
        "links.csv": ("link_id,end_a,end_b,fiber_type,plant,length_m,applications\n"
                      "P1,OLT,ONT 1,OS2,outside,1620,PON-B+\n"),
        "results/day1.csv": "link_id,wavelength_nm,loss_db,tested_at\nP1,1490,18.30,2030-01-15\n",
    })
    project = load_project(root)
    assert list(project.results["wavelength_nm"]) == [1490]


def test_agreeing_verdicts_are_not_called_a_disagreement():
    # 3.12 dB: 10GBASE-SR not supported (> 2.9) and the optic too weak (−7.3 − 3.12 =
    # −10.42 < −9.9): both say no, nothing to explain.
    assessed = _assess([_sr_link(transceiver="sr")], [dict(wavelength_nm=850, loss_db=3.12)],
                       ReferenceMethod.ONE_CORD, transceivers={"sr": SR})
    assert assessed.power["L1"].verdict.value == "too-weak"
    assert assessed.transceiver_differences("L1") == ()


def test_sheet_words_for_a_failing_link_an_end_allowance_and_uncertainty():
    from datetime import datetime

    from reportgen.report.render import build_report

    # Two-cord. L1 (OM4, 150 m): cabling limit at 850 nm 0.15 × 2.0 + 1 × 0.75 = 1.05 dB (test
    # limit set), 1.20 dB measured fails it; 10GBASE-SR: 1.20 + 0.75 = 1.95 ≤ 2.9 → every
    # check met. L2 (OM4, 100 m): 25GBASE-SR allows 1.9 dB on OM4 (IEEE 802.3 cl. 112,
    # verified, secondary); 1.00 + 0.75 = 1.75, within 0.2 dB of 1.9 → within uncertainty.
    links = [_sr_link(), make_link("L2", fiber_type=FiberType.OM4, length_m=100,
                                   applications=("25GBASE-SR",))]
    rows = [dict(wavelength_nm=850, loss_db=1.20), dict(link_id="L2", wavelength_nm=850,
                                                        loss_db=1.00)]
    project = make_project(links, rows, limits=LIMITS, method=ReferenceMethod.TWO_CORD,
                           uncertainty_db=0.2)
    judgement = judge_project(project)
    html = build_report(project, judgement, now=datetime(2030, 2, 1), version="9.9-test",
                        applications=assess_project(project, judgement)).html
    text = " ".join(html.replace("&#8202;", "").split())
    assert "loss within the channel allowance; link fails its cabling limit" in text
    assert "The two-cord reference leaves 1 of the 2 end connections out" in text
    assert "1.20 + 0.75 = 1.95" in text
    assert "supported, within uncertainty" in text
