"""Loss budget arithmetic, hand-worked. Coefficients are test inputs (tests/builders.py):
α(OM4) = 2.0 dB/km at 850 nm, 1.0 at 1300; a_conn = 0.5 dB; a_splice = 0.1 dB."""
from __future__ import annotations

import pytest

from reportgen.engine.budget import (
    END_CONNECTIONS,
    BudgetTable,
    TermKind,
    allowed_loss_db,
    budget_frame,
    link_budget,
)
from reportgen.model import Component, FiberType, Plant, ReferenceMethod
from tests.builders import TEST_LIMITS, make_link


def test_one_cord_counts_both_end_connections():
    # 0.5 km, 1 connection, 2 splices, one-cord keeps E = 2 end connections:
    # 2.0·0.5 + (1 + 2)·0.5 + 2·0.1 = 1.0 + 1.5 + 0.2 = 2.7 dB
    link = make_link(length_m=500, connections=1, splices=2)
    got = allowed_loss_db(link, 850, TEST_LIMITS, ReferenceMethod.ONE_CORD)
    assert got == pytest.approx(2.7)


@pytest.mark.parametrize(
    ("method", "end_connections", "expected_db"),
    [
        # Source: IEC 61280-4-1 / -4-2 as described in reference-values.md §3:
        # one-cord leaves both end connections in, two-cord one, three-cord none.
        (ReferenceMethod.ONE_CORD, 2, 1.0 + 3 * 0.5),
        (ReferenceMethod.TWO_CORD, 1, 1.0 + 2 * 0.5),
        (ReferenceMethod.THREE_CORD, 0, 1.0 + 1 * 0.5),
    ],
)
def test_reference_method_end_connections(method, end_connections, expected_db):
    assert END_CONNECTIONS[method] == end_connections
    link = make_link(length_m=500, connections=1)
    assert allowed_loss_db(link, 850, TEST_LIMITS, method) == pytest.approx(expected_db)


def test_components_add_their_catalog_loss():
    # 1 km OS2 inside at 1310: 0.4 + 2·0.5 + splitter 10.5 = 11.9 dB
    parts = {"split-1x8": Component("split-1x8", 10.5)}
    link = make_link(fiber_type=FiberType.OS2, length_m=1000, components=("split-1x8",))
    budget = link_budget(link, 1310, TEST_LIMITS, ReferenceMethod.ONE_CORD, parts)
    assert budget.total_db == pytest.approx(11.9)
    assert [t.kind for t in budget.terms] == [TermKind.FIBER, TermKind.END_CONNECTIONS,
                                              TermKind.COMPONENT]


def test_outside_plant_uses_outside_table_and_inside_falls_back():
    # outside OS2 at 1550: 0.1 dB/km · 2 km = 0.2, + 2·0.5 = 1.2 dB
    outside = make_link(fiber_type=FiberType.OS2, length_m=2000, plant=Plant.OUTSIDE)
    assert allowed_loss_db(outside, 1550, TEST_LIMITS, ReferenceMethod.ONE_CORD) == pytest.approx(1.2)
    # OM4 has no outside table: first table used: 2.0·2 + 1.0 = 5.0 dB
    om4_out = make_link(length_m=2000, plant=Plant.OUTSIDE)
    assert allowed_loss_db(om4_out, 850, TEST_LIMITS, ReferenceMethod.ONE_CORD) == pytest.approx(5.0)


def test_budget_frame_terms_and_limits_hand_worked():
    # Two-cord reference: E = 1 end connection (IEC 61280-4-1/-4-2, reference-values.md §3).
    # A: OM4 inside, 0.3 km, 2 connections, 1 splice:
    #    850 nm: 0.3·2.0 + (2 + 1)·0.5 + 0.1 = 0.6 + 1.5 + 0.1 = 2.2 dB
    #   1300 nm: 0.3·1.0 + 1.5 + 0.1 = 1.9 dB
    # B: OS2 outside (outside table), 2.5 km, 4 splices, part p of 1.25 dB:
    #   1310 nm: 2.5·0.2 + 1·0.5 + 4·0.1 + 1.25 = 0.5 + 0.5 + 0.4 + 1.25 = 2.65 dB
    #   1550 nm: 2.5·0.1 + 0.5 + 0.4 + 1.25 = 2.4 dB
    # C: OS2 inside, 0.09 km: 1310 nm 0.036 + 0.5 = 0.536 dB; 1550 nm 0.027 + 0.5 = 0.527 dB
    parts = {"p": Component("p", 1.25)}
    links = [
        make_link("A", length_m=300, connections=2, splices=1),
        make_link("B", fiber_type=FiberType.OS2, plant=Plant.OUTSIDE, length_m=2500, splices=4,
                  components=("p",)),
        make_link("C", fiber_type=FiberType.OS2, length_m=90),
    ]
    frame = budget_frame(links, TEST_LIMITS, ReferenceMethod.TWO_CORD, parts)
    got = {(row.link_id, row.wavelength_nm): row.limit_db for row in frame.itertuples()}
    assert got == pytest.approx({("A", 850): 2.2, ("A", 1300): 1.9, ("B", 1310): 2.65,
                                 ("B", 1550): 2.4, ("C", 1310): 0.536, ("C", 1550): 0.527})
    # The same rows, read term by term: B at 1310 nm.
    budget = BudgetTable(frame).get("B", 1310)
    assert [(t.kind, t.item_id) for t in budget.terms] == [
        (TermKind.FIBER, None), (TermKind.END_CONNECTIONS, None), (TermKind.SPLICES, None),
        (TermKind.COMPONENT, "p")]
    assert [t.quantity for t in budget.terms] == pytest.approx([2.5, 1, 4, 1])
    assert [t.loss_db for t in budget.terms] == pytest.approx([0.5, 0.5, 0.4, 1.25])
    assert budget.total_db == pytest.approx(2.65)
    # every limit is the total of its terms (the one computation, read two ways)
    table = BudgetTable(frame)
    for row in frame.itertuples():
        terms = table.get(row.link_id, row.wavelength_nm).terms
        assert row.limit_db == pytest.approx(sum(t.loss_db for t in terms), abs=1e-12)


def test_wavelength_outside_the_limit_set_has_no_budget():
    # TEST_LIMITS defines OM4 at 850 and 1300 nm only.
    link = make_link(length_m=100)
    frame = budget_frame([link], TEST_LIMITS, ReferenceMethod.ONE_CORD, {})
    assert BudgetTable(frame).get("L1", 1550) is None
    assert [b.wavelength_nm for b in BudgetTable(frame).for_link("L1")] == [850, 1300]
    with pytest.raises(KeyError):
        link_budget(link, 1550, TEST_LIMITS, ReferenceMethod.ONE_CORD, {})
