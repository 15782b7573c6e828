"""Transceiver power budgets and the level diagram, hand-worked.

Transceiver values: IEEE 802.3 clause 52 average launch and receive powers
(informative acceptance values; verified, secondary — reference-values §5):

    10GBASE-SR  tx −7.3..−1.0 dBm   rx min (average) −9.9 dBm   overload −1.0 dBm
    10GBASE-LR  tx −8.2..+0.5 dBm   rx min (average) −14.4 dBm  overload +0.5 dBm
    10GBASE-ER  tx −4.7..+4.0 dBm   rx min (average) −15.8 dBm  overload −1.0 dBm

Received power = launched power − loss (common practice, reference-values §7).
"""
from __future__ import annotations

import xml.etree.ElementTree as ET

import pytest
from hypothesis import given
from hypothesis import strategies as st

from reportgen.inputs.apptable import load_applications
from reportgen.engine.budget import link_budget
from reportgen.engine.judge import judge_project
from reportgen.report.level_diagram import LABELS, level_steps, power_level_svg
from reportgen.model import DEFAULT_ATTENUATORS_DB, FiberType, ReferenceMethod, Transceiver
from reportgen.engine.power import (
    LossRange,
    PowerBasis,
    PowerVerdict,
    assess_power,
    budget_limits_db,
    choose_attenuator_db,
    judged_loss_ranges,
    nearest_wavelength_nm,
    power_window,
)
from tests.builders import TEST_LIMITS, make_link, make_project

# IEEE 802.3 cl. 52 (verified, secondary)
SR = Transceiver("sr", 850, tx_min_dbm=-7.3, tx_max_dbm=-1.0, rx_min_average_dbm=-9.9,
                 rx_overload_dbm=-1.0)
LR = Transceiver("lr", 1310, tx_min_dbm=-8.2, tx_max_dbm=0.5, rx_min_average_dbm=-14.4,
                 rx_overload_dbm=0.5)
ER = Transceiver("er", 1550, tx_min_dbm=-4.7, tx_max_dbm=4.0, rx_min_average_dbm=-15.8,
                 rx_overload_dbm=-1.0)


def _assess(link, transceiver, results, attenuators_db=DEFAULT_ATTENUATORS_DB, **project_args):
    project = make_project([link], results, **project_args)
    judgement = judge_project(project)
    return assess_power(link, transceiver, judged_loss_ranges(judgement.results),
                        budget_limits_db(judgement.budgets), attenuators_db)


# ------------------------------------------------------------ consistency


@pytest.mark.parametrize(
    ("application", "fiber", "transceiver"),
    [
        pytest.param("10GBASE-SR", FiberType.OM3, SR,
                     id="IEEE 802.3 cl. 52: SR Tx min − Rx min = 2.6 dB = OM3 channel loss"),
        pytest.param("10GBASE-LR", FiberType.OS2, LR,
                     id="IEEE 802.3 cl. 52: LR Tx min − Rx min = 6.2 dB = channel loss"),
    ],
)
def test_tx_min_minus_rx_min_equals_channel_loss(application, fiber, transceiver):
    # reference-values §5: a consistency check between clause 52's powers and its channel loss
    # (SR on OM3 2.6 dB verified, secondary; LR 6.2 dB from memory, derived this way).
    channel_db = load_applications().get(application).limits_for(fiber).max_loss_db
    assert transceiver.tx_min_dbm - transceiver.rx_min_average_dbm == pytest.approx(channel_db)
    # a channel at exactly its maximum loss leaves zero low margin: still ok
    *_, low, high, attenuator, verdict = power_window(transceiver, channel_db, channel_db, ())
    assert low == pytest.approx(0.0, abs=1e-9)
    assert verdict is PowerVerdict.OK


# ---------------------------------------------------------- hand-worked


def test_sr_link_measured_ok():
    # Strand 1: 1.20 dB ab, 2.00 dB ba; strand 2: 1.50 dB ab, 1.60 dB ba (all 850 nm).
    # worst 2.00, least 1.20 dB.
    # rx_min = −7.3 − 2.00 = −9.30 dBm; rx_max = −1.0 − 1.20 = −2.20 dBm
    # low margin = −9.30 − (−9.9) = 0.60 dB; high margin = −1.0 − (−2.20) = 1.20 dB → ok
    link = make_link(fiber_type=FiberType.OM4, length_m=100, strands=2, transceiver="sr")
    results = [dict(wavelength_nm=850, strand=1, direction="ab", loss_db=1.20),
               dict(wavelength_nm=850, strand=1, direction="ba", loss_db=2.00),
               dict(wavelength_nm=850, strand=2, direction="ab", loss_db=1.50),
               dict(wavelength_nm=850, strand=2, direction="ba", loss_db=1.60),
               dict(wavelength_nm=1300, strand=1, direction="ab", loss_db=0.90)]
    power = _assess(link, SR, results)
    assert power.basis is PowerBasis.MEASURED
    assert power.wavelength_nm == 850
    assert power.rx_min_dbm == pytest.approx(-9.30, abs=0.005)
    assert power.rx_max_dbm == pytest.approx(-2.20, abs=0.005)
    assert power.low_margin_db == pytest.approx(0.60, abs=0.005)
    assert power.high_margin_db == pytest.approx(1.20, abs=0.005)
    assert power.verdict is PowerVerdict.OK
    assert power.to_json() == {
        "transceiver": "sr", "basis": "measured", "wavelength_nm": 850,
        "rx_min_dbm": -9.3, "rx_max_dbm": -2.2, "low_margin_db": 0.6, "high_margin_db": 1.2,
        "attenuator_db": None, "verdict": "ok", "end_allowance_db": 0.0,
    }


def test_superseded_and_invalid_results_do_not_count():
    # 3.50 dB on the 14th is superseded by 1.40 dB on the 15th; −0.80 dB (another strand)
    # is invalid (negative loss). Only 1.40 dB counts: rx_min = −7.3 − 1.40 = −8.70 dBm.
    link = make_link(fiber_type=FiberType.OM4, length_m=100, strands=2, transceiver="sr")
    results = [dict(wavelength_nm=850, loss_db=3.50, tested_at="2030-01-14"),
               dict(wavelength_nm=850, loss_db=1.40, tested_at="2030-01-15"),
               dict(wavelength_nm=850, strand=2, loss_db=-0.80)]
    power = _assess(link, SR, results)
    assert power.worst_loss_db == pytest.approx(1.40)
    assert power.least_loss_db == pytest.approx(1.40)
    assert power.rx_min_dbm == pytest.approx(-8.70)


def test_sr_link_too_weak():
    # Worst 3.12 dB: rx_min = −7.3 − 3.12 = −10.42 dBm < −9.9: low margin −0.52 dB → too-weak
    link = make_link(fiber_type=FiberType.OM4, length_m=300, transceiver="sr")
    power = _assess(link, SR, [dict(wavelength_nm=850, loss_db=3.12),
                               dict(wavelength_nm=850, direction="ba", loss_db=2.97)])
    assert power.low_margin_db == pytest.approx(-0.52, abs=0.005)
    assert power.verdict is PowerVerdict.TOO_WEAK
    assert power.attenuator_db is None


def test_er_optic_on_short_link_needs_an_attenuator():
    # Worst 0.61, least 0.58 dB at 1550 nm.
    # rx_max = 4.0 − 0.58 = 3.42 dBm; high margin = −1.0 − 3.42 = −4.42 dB → too strong
    # attenuator ≥ 4.42 dB: from 1, 2, 3, 5, … the smallest is 5 dB;
    # then rx_min = −4.7 − 0.61 − 5 = −10.31 dBm ≥ −15.8 → fits.
    link = make_link(fiber_type=FiberType.OS2, length_m=300, transceiver="er")
    power = _assess(link, ER, [dict(wavelength_nm=1550, loss_db=0.61),
                               dict(wavelength_nm=1550, direction="ba", loss_db=0.58),
                               dict(wavelength_nm=1310, loss_db=0.70)])
    assert power.wavelength_nm == 1550
    assert power.rx_max_dbm == pytest.approx(3.42, abs=0.005)
    assert power.high_margin_db == pytest.approx(-4.42, abs=0.005)
    assert power.verdict is PowerVerdict.TOO_STRONG
    assert power.attenuator_db == 5.0
    assert power.to_json()["attenuator_db"] == 5.0


def test_no_judged_result_uses_the_budget():
    # No results: the budget at the wavelength nearest 1310 nm. Test limit set: OS2 inside
    # 0.4 dB/km at 1310; 1.0 km, one-cord (2 end connections × 0.5 dB):
    # 0.4 + 1.0 = 1.40 dB. rx_min = −8.2 − 1.40 = −9.60; rx_max = 0.5 − 1.40 = −0.90 dBm.
    link = make_link(fiber_type=FiberType.OS2, length_m=1000, transceiver="lr")
    power = _assess(link, LR, [])
    assert power.basis is PowerBasis.BUDGET
    assert power.wavelength_nm == 1310
    assert power.rx_min_dbm == pytest.approx(-9.60)
    assert power.rx_max_dbm == pytest.approx(-0.90)
    assert power.verdict is PowerVerdict.OK
    assert power.to_json()["basis"] == "budget"


def test_no_transceiver_gives_none():
    link = make_link()
    assert assess_power(link, None, {}, {}, DEFAULT_ATTENUATORS_DB) is None


@pytest.mark.parametrize(
    ("available", "target", "expected"),
    [((1310, 1550), 1490, 1550), ((1310, 1550), 1430, 1310), ((850, 1300), 850, 850),
     ((1550,), 1310, 1550)],
)
def test_nearest_wavelength(available, target, expected):
    # 1490 is 60 nm from 1550 and 180 from 1310; 1430 is 120 from both: the shorter wins.
    assert nearest_wavelength_nm(available, target) == expected


def test_transceiver_between_test_wavelengths_uses_nearest():
    # A 1490 nm optic on a link tested at 1310 (0.9 dB) and 1550 (0.7 dB): 1550 is used.
    transceiver = Transceiver("x", 1490, -3.0, 2.0, -28.0, -8.0)
    link = make_link(fiber_type=FiberType.OS2, length_m=1000)
    ranges = {"L1": {1310: LossRange(0.9, 0.9, 1), 1550: LossRange(0.7, 0.7, 1)}}
    power = assess_power(link, transceiver, ranges, {}, DEFAULT_ATTENUATORS_DB)
    assert power.wavelength_nm == 1550
    assert power.worst_loss_db == 0.7


# --------------------------------------------------------- attenuators


def test_attenuator_exactly_at_overload_fits():
    # rx_max 2.0 dBm, overload −1.0: 3 dB brings it to exactly −1.0 dBm → fits (≤).
    assert choose_attenuator_db(-5.0, 2.0, -15.0, -1.0, [1, 2, 3, 5]) == 3.0


def test_attenuator_exactly_at_sensitivity_fits():
    # rx_min −12.0, sensitivity −15.0: 3 dB brings it to exactly −15.0 dBm → fits (≥).
    assert choose_attenuator_db(-12.0, 1.0, -15.0, -1.0, [3, 5]) == 3.0


def test_attenuator_with_float_noise_at_overload_fits():
    # 0.5 − 0.3 = 0.2 dBm (binary float 0.20000000000000001); 3 dB → −2.8 dBm = overload.
    *_, attenuator, verdict = power_window(Transceiver("t", 1310, -5.0, 0.5, -20.0, -2.8),
                                           0.3, 0.3, [1, 2, 3])
    assert attenuator == 3.0
    assert verdict is PowerVerdict.TOO_STRONG


def test_window_wider_than_receiver_window_is_no_fit():
    # rx −14..2 dBm vs receiver −15..−1: needs A ≥ 3 (overload) and A ≤ 1 (sensitivity).
    assert choose_attenuator_db(-14.0, 2.0, -15.0, -1.0, DEFAULT_ATTENUATORS_DB) is None
    *_, attenuator, verdict = power_window(Transceiver("t", 1550, -12.0, 4.0, -15.0, -1.0),
                                           2.0, 2.0, DEFAULT_ATTENUATORS_DB)
    assert (attenuator, verdict) == (None, PowerVerdict.NO_FIT)


def test_no_attenuator_large_enough_is_no_fit():
    # rx_max +4.0 − 0 = 4.0 dBm vs overload −25 dBm: needs ≥ 29 dB; largest offered is 20.
    *_, attenuator, verdict = power_window(Transceiver("t", 1550, 0.0, 4.0, -40.0, -25.0),
                                           0.0, 0.0, DEFAULT_ATTENUATORS_DB)
    assert (attenuator, verdict) == (None, PowerVerdict.NO_FIT)


def test_exactly_at_overload_without_attenuator_is_ok():
    # LR over a 0 dB path: rx_max = 0.5 dBm = overload: high margin 0 → ok.
    *_, high, attenuator, verdict = power_window(LR, 0.0, 0.0, DEFAULT_ATTENUATORS_DB)
    assert high == 0.0
    assert (attenuator, verdict) == (None, PowerVerdict.OK)


attenuator_lists = st.lists(st.sampled_from([0.5, 1, 2, 3, 5, 7, 10, 15, 20, 25]),
                            min_size=1, max_size=8, unique=True)
levels = st.floats(min_value=-40.0, max_value=10.0, allow_nan=False)


@given(levels, st.floats(min_value=0.0, max_value=20.0), levels,
       st.floats(min_value=0.0, max_value=30.0), attenuator_lists)
def test_chosen_attenuator_fits_and_is_the_smallest(rx_min, spread, sensitivity, window,
                                                    attenuators):
    rx_max, overload = rx_min + spread, sensitivity + window
    chosen = choose_attenuator_db(rx_min, rx_max, sensitivity, overload, attenuators)

    def fits(a: float) -> bool:
        return rx_max - a <= overload + 1e-9 and rx_min - a >= sensitivity - 1e-9

    if chosen is None:
        assert not any(fits(a) for a in attenuators)
    else:
        assert fits(chosen)
        assert not any(fits(a) for a in attenuators if a < chosen)


@given(st.floats(min_value=0.0, max_value=30.0), st.floats(min_value=0.0, max_value=30.0))
def test_window_follows_launch_minus_loss(loss_a, loss_b):
    worst, least = max(loss_a, loss_b), min(loss_a, loss_b)
    rx_min, rx_max, low, high, _, _ = power_window(ER, worst, least, ())
    assert rx_min == pytest.approx(ER.tx_min_dbm - worst)
    assert rx_max == pytest.approx(ER.tx_max_dbm - least)
    assert low == pytest.approx(rx_min - ER.rx_min_average_dbm)
    assert high == pytest.approx(ER.rx_overload_dbm - rx_max)
    assert rx_max >= rx_min


# --------------------------------------------------------- level diagram


def _er_power_and_steps():
    link = make_link(fiber_type=FiberType.OS2, length_m=300, splices=1, transceiver="er")
    power = _assess(link, ER, [dict(wavelength_nm=1550, loss_db=0.61)])
    budget = link_budget(link, power.wavelength_nm, TEST_LIMITS, ReferenceMethod.ONE_CORD, {})
    return power, level_steps(budget)


def test_level_steps_follow_the_budget():
    # one-cord budget: end connection, fiber, splices, end connection (launch to receiver)
    _, steps = _er_power_and_steps()
    assert [s.label for s in steps] == ["end conn.", "fiber", "splices", "end conn."]
    assert [s.sloped for s in steps] == [False, True, False, False]
    # shares: 0.5, 0.3 km × 0.3 dB/km = 0.09, 0.1, 0.5 dB (test limit set)
    assert [s.share_db for s in steps] == pytest.approx([0.5, 0.09, 0.1, 0.5])


def test_level_diagram_is_wellformed_grayscale_and_deterministic():
    power, steps = _er_power_and_steps()
    svg = power_level_svg(power, steps)
    root = ET.fromstring(svg)
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert svg == power_level_svg(power, steps)
    text = " ".join("".join(e.itertext()) for e in root.iter())
    for key in ("receiver", "launch", "highest", "lowest", "window"):
        assert LABELS[key] in text
    assert "attenuator 5.0 dB" in text  # the recommended attenuator is drawn
    assert "overload \u22121.0 dBm" in text and "receive min. \u221215.8 dBm" in text
    colours = {v for e in root.iter() for k, v in e.attrib.items() if k in ("stroke", "fill")}
    assert colours <= {"#000", "#555", "#888", "#fff", "none"}


def test_level_diagram_labels_can_be_translated():
    power, steps = _er_power_and_steps()
    labels = {**LABELS, "receiver": "Empfänger", "too-strong": "zu stark <Dämpfung>"}
    svg = power_level_svg(power, steps, labels)
    assert "Empfänger" in svg
    assert "zu stark &lt;Dämpfung&gt;" in svg  # text is escaped
    ET.fromstring(svg)


def test_level_diagram_without_budget_draws_one_step():
    power, _ = _er_power_and_steps()
    svg = power_level_svg(power)
    assert LABELS["link"] in svg
    ET.fromstring(svg)
