"""dB, dBm and mW helpers against definitions, facts of the trade and pint's logarithmic units.

pint is an independent reference here only: reportgen computes with plain floats.
Logarithmic units need ``autoconvert_offset_to_baseunit=True``, and the difference of
two dBm quantities must be converted ``.to("dB")`` (pint documentation).
"""
from __future__ import annotations

import math
from decimal import ROUND_HALF_EVEN, Decimal

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pint import UnitRegistry

from reportgen.units import (
    db_to_ratio,
    dbm_to_mw,
    format_db,
    mw_to_dbm,
    ratio_to_db,
    received_power_dbm,
    round_db,
    round_length_m,
    sum_losses_db,
)

UREG = UnitRegistry(autoconvert_offset_to_baseunit=True)
Q = UREG.Quantity


@pytest.mark.parametrize(
    ("power_dbm", "power_mw"),
    [
        pytest.param(0.0, 1.0, id="0 dBm = 1 mW (definition)"),
        pytest.param(-3.0, 0.50119, id="-3 dBm = 0.50119 mW (definition)"),
        pytest.param(3.0103, 2.0, id="2 mW = 3.0103 dBm (definition)"),
        pytest.param(-20.0, 0.01, id="-20 dBm = 0.01 mW (definition)"),
    ],
)
def test_dbm_mw_definition(power_dbm, power_mw):
    assert dbm_to_mw(power_dbm) == pytest.approx(power_mw, rel=1e-4)
    assert mw_to_dbm(power_mw) == pytest.approx(power_dbm, abs=1e-4)


@settings(max_examples=40)
@given(st.floats(min_value=-60.0, max_value=30.0))
def test_dbm_to_mw_agrees_with_pint(power_dbm):
    # pint: logarithmic unit dBm converted to milliwatt
    expected_mw = Q(power_dbm, "dBm").to("mW").magnitude
    assert dbm_to_mw(power_dbm) == pytest.approx(expected_mw, rel=1e-12)


@settings(max_examples=40)
@given(st.floats(min_value=1e-6, max_value=1e3))
def test_mw_to_dbm_agrees_with_pint(power_mw):
    expected_dbm = Q(power_mw, "mW").to("dBm").magnitude
    assert mw_to_dbm(power_mw) == pytest.approx(expected_dbm, abs=1e-9)


@settings(max_examples=40)
@given(st.floats(min_value=-60.0, max_value=30.0), st.floats(min_value=0.0, max_value=40.0))
def test_received_power_is_launch_minus_loss_as_pint_says(launch_dbm, loss_db):
    # pint: the difference of two dBm levels, converted to dB, is the loss between them
    rx_dbm = received_power_dbm(launch_dbm, loss_db)
    assert (Q(launch_dbm, "dBm") - Q(rx_dbm, "dBm")).to("dB").magnitude == pytest.approx(
        loss_db, abs=1e-9)


def test_source_through_loss_fact_of_the_trade():
    # Common practice (reference-values §7): 0 dBm through 2.2 dB of loss gives -2.2 dBm.
    assert received_power_dbm(0.0, 2.2) == pytest.approx(-2.2)
    assert (Q(0.0, "dBm") - Q(-2.2, "dBm")).to("dB").magnitude == pytest.approx(2.2)


def test_losses_add_in_db_fact_of_the_trade():
    # Common practice (reference-values §7): 0.5 dB at a connection + 0.1 dB of fiber = 0.6 dB.
    assert sum_losses_db([0.5, 0.1]) == pytest.approx(0.6)
    # pint adds logarithmic gains the same way (it multiplies the ratios)
    assert (Q(0.5, "dB") + Q(0.1, "dB")).to("dB").magnitude == pytest.approx(0.6)


@given(st.lists(st.floats(min_value=0.0, max_value=10.0), max_size=10))
def test_sum_of_db_is_product_of_ratios(losses_db):
    # Definition: dB is 10·log10 of a power ratio, so dB add where ratios multiply.
    product = math.prod(db_to_ratio(-loss) for loss in losses_db)
    assert -ratio_to_db(product) == pytest.approx(sum_losses_db(losses_db), abs=1e-9)


def test_one_to_32_splitter_physics():
    # Physics: an ideal 1:N splitter sends 1/N of the power to each port: 10·log10(32) = 15.05 dB
    # (reference-values §4).
    assert -ratio_to_db(1 / 32) == pytest.approx(15.05, abs=0.005)


def test_db_is_ten_log10_of_power_ratio():
    # Definition: a power ratio of 2 is 3.0103 dB (10·log10, never 20·log10 in reportgen).
    assert ratio_to_db(2.0) == pytest.approx(3.0103, abs=1e-4)
    assert db_to_ratio(10.0) == pytest.approx(10.0)


def test_non_positive_power_is_refused():
    with pytest.raises(ValueError, match="positive"):
        mw_to_dbm(0.0)
    with pytest.raises(ValueError, match="positive"):
        ratio_to_db(-1.0)


# ------------------------------------------------------------ the rounding of outputs


def _decimal_reference(value: float) -> str:
    """Python's decimal module (an independent reference): the exact binary value rounded
    to 0.01, ties to even, without a minus sign on zero."""
    text = str(Decimal(value).quantize(Decimal("0.01"), rounding=ROUND_HALF_EVEN))
    return "0.00" if text == "-0.00" else text


@settings(max_examples=300)
@given(st.floats(min_value=-200, max_value=200, allow_nan=False))
def test_format_db_rounds_as_the_decimal_module(value):
    assert format_db(value) == _decimal_reference(value)
    assert round_db(value) == float(_decimal_reference(value))


def test_format_db_writes_exactly_two_decimals():
    # the examples of the rounding policy (docs/project-format.md §10.1)
    assert format_db(1.3) == "1.30"
    assert format_db(-0.5) == "-0.50"
    assert format_db(-0.004) == "0.00"  # no negative zero
    assert format_db(2.675) == "2.67"  # the binary value of 2.675 is below 2.675 (Python docs, round())
    assert round_db(None) is None and round_db(float("nan")) is None
    with pytest.raises(ValueError):
        format_db(float("inf"))


def test_round_length_m_keeps_centimetres():
    # 100 ft = 30.48 m exactly (international foot, 0.3048 m; 1959 agreement)
    assert round_length_m(100 * 0.3048) == 30.48
    assert round_length_m(833.0) == 833.0
    assert math.isnan(round_length_m(float("nan"))) and round_length_m(None) is None
