"""Judging rules of docs/project-format.md ("How a result is judged"), hand-worked.

Coefficients are test inputs (tests/builders.TEST_LIMITS), not a standard's values:
α(OM4) 2.0 dB/km @850, 1.0 @1300; a_conn 0.5 dB; a_splice 0.1 dB. A 500 m OM4 link
with no connections under one-cord has limit 2.0·0.5 + 2·0.5 = 2.0 dB @850 and
1.0·0.5 + 1.0 = 1.5 dB @1300.
"""
from __future__ import annotations

import math
from datetime import date

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from reportgen.engine.judge import judge_project
from reportgen.model import Directions, Instrument, InstrumentKind, LinkVerdict, ResultFlag
from tests.builders import make_link, make_project

FULL = [dict(wavelength_nm=w, direction=d, loss_db=1.0) for w in (850, 1300) for d in ("ab", "ba")]


def _row(judgement, index):
    return judgement.results.iloc[index]


def test_margin_is_limit_minus_loss_and_pass():
    judgement = judge_project(make_project([make_link()], FULL))
    row = _row(judgement, 0)
    assert row["limit_db"] == pytest.approx(2.0)  # hand-worked above
    assert row["margin_db"] == pytest.approx(1.0)  # 2.0 − 1.0
    assert row["verdict"] == "pass"
    assert judgement.links[0].verdict is LinkVerdict.PASS
    assert judgement.links[0].worst_margin_db == pytest.approx(0.5)  # 1.5 − 1.0 at 1300


def test_loss_equal_to_limit_passes_and_just_above_fails():
    rows = FULL[1:] + [dict(wavelength_nm=850, direction="ab", loss_db=2.0)]
    assert judge_project(make_project([make_link()], rows)).links[0].verdict is LinkVerdict.PASS
    rows = FULL[1:] + [dict(wavelength_nm=850, direction="ab", loss_db=2.01)]
    judgement = judge_project(make_project([make_link()], rows))
    assert judgement.links[0].verdict is LinkVerdict.FAIL
    assert judgement.links[0].worst_margin_db == pytest.approx(-0.01)


def test_within_uncertainty_flag_on_both_sides_of_the_limit():
    rows = [dict(wavelength_nm=850, direction="ab", loss_db=1.85),   # margin +0.15
            dict(wavelength_nm=850, direction="ba", loss_db=2.15),   # margin −0.15
            dict(wavelength_nm=1300, direction="ab", loss_db=1.0),   # margin +0.5
            dict(wavelength_nm=1300, direction="ba", loss_db=1.0)]
    judgement = judge_project(make_project([make_link()], rows, uncertainty_db=0.2))
    flags = list(judgement.results["flags"])
    assert flags == [(ResultFlag.WITHIN_UNCERTAINTY,), (ResultFlag.WITHIN_UNCERTAINTY,), (), ()]
    assert list(judgement.results["verdict"]) == ["pass", "fail", "pass", "pass"]


def test_negative_loss_beyond_uncertainty_is_invalid_and_counts_as_missing():
    rows = FULL[1:] + [dict(wavelength_nm=850, direction="ab", loss_db=-0.35)]
    judgement = judge_project(make_project([make_link()], rows, uncertainty_db=0.2))
    assert judgement.results["verdict"].iloc[-1] == "invalid"
    assert judgement.results["flags"].iloc[-1] == (ResultFlag.NEGATIVE_LOSS,)
    outcome = judgement.links[0]
    assert outcome.verdict is LinkVerdict.INCOMPLETE
    assert [(m.wavelength_nm, m.direction, m.reason) for m in outcome.missing] == [
        (850, "ab", "invalid")]


def test_small_negative_loss_within_uncertainty_is_judged():
    rows = FULL[1:] + [dict(wavelength_nm=850, direction="ab", loss_db=-0.1)]
    judgement = judge_project(make_project([make_link()], rows, uncertainty_db=0.2))
    assert judgement.results["verdict"].iloc[-1] == "pass"


def test_latest_retest_is_judged_and_earlier_is_superseded():
    rows = FULL[1:] + [
        dict(wavelength_nm=850, direction="ab", loss_db=2.4, tested_at="2030-01-15T09:00"),
        dict(wavelength_nm=850, direction="ab", loss_db=1.2, tested_at="2030-01-16"),
    ]
    judgement = judge_project(make_project([make_link()], rows))
    assert list(judgement.results["verdict"].iloc[-2:]) == ["superseded", "pass"]
    assert judgement.results["flags"].iloc[-1] == (ResultFlag.RETEST,)
    assert judgement.links[0].verdict is LinkVerdict.PASS


def test_flags_are_a_tuple_per_row_in_rule_order():
    # One row with three flags (docs/project-format.md §6.7): a retest (a second row of the
    # same key), within the 0.2 dB uncertainty (hand-worked: limit 2.0 dB for 500 m OM4 at
    # 850 nm with the test set, loss 1.9 dB, margin 0.1 dB) and measured with a power meter
    # whose calibration was due the day before.
    meter = Instrument("PM-1", InstrumentKind.POWER_METER, calibration_due=date(2030, 1, 15))
    rows = FULL[1:] + [
        dict(wavelength_nm=850, direction="ab", loss_db=1.2, tested_at="2030-01-15"),
        dict(wavelength_nm=850, direction="ab", loss_db=1.9, tested_at="2030-01-16",
             instrument=["PM-1"]),
    ]
    judgement = judge_project(make_project([make_link()], rows, uncertainty_db=0.2,
                                           instruments=[meter]))
    assert judgement.results["flags"].iloc[-1] == (
        ResultFlag.WITHIN_UNCERTAINTY, ResultFlag.RETEST, ResultFlag.CALIBRATION_OVERDUE)
    assert judgement.results["flags"].iloc[-2] == ()  # the superseded row
    assert judgement.links[0].within_uncertainty == 1


def test_retest_order_is_by_time_not_by_file_order():
    rows = FULL[1:] + [
        dict(wavelength_nm=850, direction="ab", loss_db=1.2, tested_at="2030-01-16"),
        dict(wavelength_nm=850, direction="ab", loss_db=2.4, tested_at="2030-01-15"),
    ]
    judgement = judge_project(make_project([make_link()], rows))
    assert list(judgement.results["verdict"].iloc[-2:]) == ["pass", "superseded"]


def test_latest_invalid_retest_leaves_the_result_missing():
    rows = FULL[1:] + [
        dict(wavelength_nm=850, direction="ab", loss_db=1.2, tested_at="2030-01-15"),
        dict(wavelength_nm=850, direction="ab", loss_db=-1.0, tested_at="2030-01-16"),
    ]
    judgement = judge_project(make_project([make_link()], rows))
    assert list(judgement.results["verdict"].iloc[-2:]) == ["superseded", "invalid"]
    assert judgement.links[0].verdict is LinkVerdict.INCOMPLETE


def test_missing_strand_wavelength_direction_are_listed():
    link = make_link(strands=2)
    judgement = judge_project(make_project([link], FULL))
    outcome = judgement.links[0]
    assert outcome.verdict is LinkVerdict.INCOMPLETE
    assert {(m.strand, m.wavelength_nm, m.direction) for m in outcome.missing} == {
        (2, 850, "ab"), (2, 850, "ba"), (2, 1300, "ab"), (2, 1300, "ba")}


def test_directions_one_needs_either_direction():
    rows = [dict(wavelength_nm=850, direction="ba", loss_db=1.0),
            dict(wavelength_nm=1300, direction="ab", loss_db=1.0)]
    project = make_project([make_link()], rows, directions=Directions.ONE)
    assert judge_project(project).links[0].verdict is LinkVerdict.PASS


def test_failure_outranks_missing():
    rows = [dict(wavelength_nm=850, direction="ab", loss_db=5.0)]
    outcome = judge_project(make_project([make_link()], rows)).links[0]
    assert outcome.verdict is LinkVerdict.FAIL
    assert len(outcome.missing) == 3


def test_link_without_results_is_incomplete_with_no_worst_margin():
    outcome = judge_project(make_project([make_link()], [])).links[0]
    assert outcome.verdict is LinkVerdict.INCOMPLETE
    assert outcome.worst_margin_db is None
    assert len(outcome.missing) == 4


def test_calibration_overdue_flag():
    meter = Instrument("PM-1", InstrumentKind.POWER_METER, calibration_due=date(2030, 1, 15))
    rows = [dict(wavelength_nm=850, loss_db=1.0, tested_at="2030-01-15", instrument=["PM-1"]),
            dict(wavelength_nm=850, direction="ba", loss_db=1.0, tested_at="2030-01-16T08:00",
                 instrument=["SRC", "PM-1"])]
    judgement = judge_project(make_project([make_link()], rows, instruments=[meter]))
    assert judgement.results["flags"].iloc[0] == ()
    assert judgement.results["flags"].iloc[1] == (ResultFlag.CALIBRATION_OVERDUE,)


def test_totals_count_link_verdicts():
    links = [make_link("A"), make_link("B"), make_link("C")]
    rows = ([dict(r, link_id="A") for r in FULL]
            + [dict(r, link_id="B", loss_db=9.0) for r in FULL])
    judgement = judge_project(make_project(links, rows))
    assert judgement.totals == {"links": 3, "pass": 1, "fail": 1, "incomplete": 1}


loss = st.floats(min_value=-0.19, max_value=20, allow_nan=False)


@settings(max_examples=60, deadline=None)
@given(losses=st.lists(loss, min_size=4, max_size=4),
       length_m=st.floats(min_value=1, max_value=5000),
       connections=st.integers(0, 6), splices=st.integers(0, 6))
def test_properties_margin_and_link_verdict(losses, length_m, connections, splices):
    link = make_link(length_m=length_m, connections=connections, splices=splices)
    rows = [dict(r, loss_db=value) for r, value in zip(FULL, losses)]
    judgement = judge_project(make_project([link], rows, uncertainty_db=0.2))
    frame = judgement.results
    # margin = limit − loss, exactly as defined
    assert all(math.isclose(m, l - x, abs_tol=1e-9)
               for m, l, x in zip(frame["margin_db"], frame["limit_db"], frame["loss_db"]))
    # a link never passes with a failing result
    if (frame["verdict"] == "fail").any():
        assert judgement.links[0].verdict is LinkVerdict.FAIL
    else:
        assert judgement.links[0].verdict is LinkVerdict.PASS


@settings(max_examples=60, deadline=None)
@given(length_m=st.floats(min_value=0.1, max_value=100_000), extra_m=st.floats(0, 1000),
       connections=st.integers(0, 20), splices=st.integers(0, 50), more=st.integers(1, 5))
def test_property_limit_grows_with_length_connections_splices(length_m, extra_m, connections,
                                                              splices, more):
    from reportgen.engine.budget import allowed_loss_db
    from reportgen.model import ReferenceMethod
    from tests.builders import TEST_LIMITS

    def limit(**kw):
        base = dict(length_m=length_m, connections=connections, splices=splices)
        base.update(kw)
        return allowed_loss_db(make_link(**base), 850, TEST_LIMITS, ReferenceMethod.ONE_CORD)

    assert limit(length_m=length_m + extra_m) >= limit()
    assert limit(connections=connections + more) > limit()
    assert limit(splices=splices + more) > limit()


def test_empty_project_is_judged_without_error():
    # Zero links and zero results: nothing to judge, every count zero.
    judgement = judge_project(make_project([], []))
    assert judgement.links == ()
    assert judgement.totals == {"links": 0, "pass": 0, "fail": 0, "incomplete": 0}
    assert judgement.results.empty and judgement.budgets.empty
    for column in ("limit_db", "margin_db", "verdict", "flags", "judged"):
        assert column in judgement.results.columns


def test_same_time_retest_the_row_read_last_wins():
    # Rule of docs/project-format.md, "How a result is judged": ties go to the row read last.
    rows = FULL[1:] + [
        dict(wavelength_nm=850, direction="ab", loss_db=2.4, tested_at="2030-01-16T10:00"),
        dict(wavelength_nm=850, direction="ab", loss_db=1.2, tested_at="2030-01-16T10:00"),
        dict(wavelength_nm=850, direction="ab", loss_db=1.9, tested_at="2030-01-15T10:00"),
    ]
    judgement = judge_project(make_project([make_link()], rows))
    assert list(judgement.results["verdict"].iloc[-3:]) == ["superseded", "pass", "superseded"]
    assert list(judgement.results["judged"].iloc[-3:]) == [False, True, False]


def test_calibration_overdue_when_any_named_instrument_is_late():
    # Of several instruments on a row, the one due earliest decides; unknown names and
    # instruments without a due date never make a row late.
    early = Instrument("SRC-1", InstrumentKind.LIGHT_SOURCE, calibration_due=date(2030, 1, 10))
    late = Instrument("PM-1", InstrumentKind.POWER_METER, calibration_due=date(2030, 1, 20))
    undated = Instrument("PM-2", InstrumentKind.POWER_METER)
    rows = [dict(wavelength_nm=850, loss_db=1.0, tested_at="2030-01-12", instrument=["PM-1"]),
            dict(wavelength_nm=850, direction="ba", loss_db=1.0, tested_at="2030-01-12",
                 instrument=["PM-1", "SRC-1"]),
            dict(wavelength_nm=1300, loss_db=1.0, tested_at="2030-01-25",
                 instrument=["PM-2", "OTHER"]),
            dict(wavelength_nm=1300, direction="ba", loss_db=1.0, tested_at="2030-01-10T23:00",
                 instrument=["SRC-1"])]
    judgement = judge_project(make_project([make_link()], rows,
                                           instruments=[early, late, undated]))
    overdue = [ResultFlag.CALIBRATION_OVERDUE in flags for flags in judgement.results["flags"]]
    assert overdue == [False, True, False, False]


def _oracle(rows, links, strands_by_link):
    """The judging rules read row by row (docs/project-format.md): latest per key, ties to
    the row read last; invalid when loss < −uncertainty (here 0); missing when a required
    key has no judged row."""
    latest = {}
    for order, row in enumerate(rows):
        key = (row["link_id"], row["strand"], row["wavelength_nm"], row["direction"])
        stamp = (row["tested_at"], order)
        if key not in latest or stamp > latest[key][0]:
            latest[key] = (stamp, order)
    judged_orders = {order for _, order in latest.values() if rows[order]["loss_db"] >= 0}
    judged_keys = {(r["link_id"], r["strand"], r["wavelength_nm"], r["direction"])
                   for order, r in enumerate(rows) if order in judged_orders}
    missing = {link: sorted((s, w, d) for s in range(1, strands_by_link[link] + 1)
                            for w in (850, 1300) for d in ("ab", "ba")
                            if (link, s, w, d) not in judged_keys) for link in links}
    return judged_orders, missing


@pytest.mark.parametrize("seed", [3, 4])
def test_retests_and_missing_results_follow_the_rules_on_random_rows(seed):
    import random

    rng = random.Random(seed)
    links = [make_link(f"L{n}", strands=rng.randint(1, 3)) for n in range(40)]
    strands_by_link = {link.link_id: link.strands for link in links}
    rows = []
    for _ in range(300):
        link = rng.choice(links)
        rows.append(dict(link_id=link.link_id, strand=rng.randint(1, link.strands),
                         wavelength_nm=rng.choice((850, 1300)), direction=rng.choice(("ab", "ba")),
                         loss_db=rng.choice([-0.5, 0.8, 1.4, 3.0]),
                         tested_at=f"2030-01-{rng.randint(10, 12)}T0{rng.randint(8, 9)}:00"))
    judgement = judge_project(make_project(links, rows))
    judged_orders, missing = _oracle(rows, [link.link_id for link in links], strands_by_link)
    assert [i for i, judged in enumerate(judgement.results["judged"]) if judged] == sorted(
        judged_orders)
    for outcome in judgement.links:
        assert [(m.strand, m.wavelength_nm, m.direction) for m in outcome.missing] == missing[
            outcome.link_id]
        assert outcome.judged == sum(1 for i in judged_orders
                                     if rows[i]["link_id"] == outcome.link_id)
