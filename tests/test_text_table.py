"""Tables set as lines of monospaced text (reportgen/report/text_table.py), and the OTDR event
table built with it in every report language.

The expected lines below are worked by hand (columns as wide as their widest cell, two spaces
between them, numbers flush right, the last column folded at spaces).
"""
from __future__ import annotations

import html

import pytest

from reportgen.report import i18n, messages
from reportgen.report.render import make_environment
from reportgen.report.text_table import MIN_LAST, text_table


def test_columns_are_as_wide_as_their_widest_cell_and_numbers_flush_right():
    table = text_table([["No.", "Kind", "Loss", "Note"]],
                       [["1", "splice", "0.08", "ok"], ["12", "connection", "0.35", "fine"]],
                       "rlrl", width=80)
    assert table.head == ("No.  Kind        Loss  Note        ",)
    assert [row[0] for row in table.rows] == [
        "  1  splice      0.08  ok          ",
        " 12  connection  0.35  fine        ",
    ]
    assert table.width == 3 + 2 + 10 + 2 + 4 + 2 + MIN_LAST  # the last column at least 12 wide
    assert all(len(line) == table.width for line in table.lines)


def test_the_last_column_folds_under_itself_so_a_row_reads_in_order():
    table = text_table([["No.", "Verdict, notes"]],
                       [["3", "fail: seen from one end only; inside a test cord"]], "rl", width=22)
    # 3 + 2 characters before the last column, which gets the other 17
    assert table.head == ("No.  Verdict, notes   ",)
    assert table.rows == ((
        "  3  fail: seen from  ",
        "     one end only;    ",
        "     inside a test    ",
        "     cord             ",
    ),)


def test_a_long_label_of_the_last_column_folds_onto_the_next_header_line():
    table = text_table([["No.", "Bewertung, Bemerkungen"], ["", ""]], [["1", "bestanden"]], "rl", width=17)
    assert table.head == ("No.  Bewertung,  ", "     Bemerkungen ")


def test_gaps_shrink_before_the_last_column_gets_too_narrow():
    table = text_table([["a" * 10, "b" * 10, "c"]], [["1", "2", "note"]], "rrl", width=10 + 10 + 2 + MIN_LAST)
    assert table.head[0].startswith("a" * 10 + " " + "b" * 10 + " c")


def test_bad_shapes_are_refused():
    with pytest.raises(ValueError):
        text_table([["a", "b"]], [["1"]], "rl", width=40)
    with pytest.raises(ValueError):
        text_table([["a", "b"]], [["1", "2"]], "lr", width=40)


# ------------------------------------------------------------- the OTDR event table, every language

TEMPLATE = """{% set rows = [
 ["12", "-12,345.6 m", t.otdr_kind_reflective, "-10.00 / -10.00", "-10.00", "-10.00 / -10.00", "-65.00", "0.75",
  t.verdict_fail ~ ": " ~ t["otdr_flag_negative-average"] ~ "; " ~ t["otdr_flag_lsa-differs"]],
 ["1", "0 m", t.otdr_kind_connector, "0.35 / 0.35", "0.35", "0.35", "-50.00", "0.75", t.verdict_pass]] %}
{% set table = text_table([[t.col_event_no, t.col_position, t.col_event, t.col_event_loss, t.col_loss_avg,
 t.col_remeasured, t.col_reflectance, t.col_allowance_short, t.col_verdict_notes],
 ["", "", "", "A→B / B→A [dB]", "[dB]", "LSA [dB]", "[dB]", "[dB]", ""]], rows, "rrlrrrrrl", 118) %}
{{ table.lines|join("\\n") }}"""


@pytest.mark.parametrize("code", ["en", "de", "fr", "es"])
def test_the_widest_event_table_fits_the_line_in_every_language(code):
    """The longest event kind, five-character reflectances, two-value losses and a failed row
    with two notes: every line of at most 118 characters (7 pt DejaVu Sans Mono across the
    180 mm of an A4 page holds 121: 180 / (7 × 1233/2048 × 25.4/72) = 121.1), and each header
    label on one line (so the header reads label by label)."""
    lang = i18n.language(code)
    env = make_environment(None, "m", lang)
    lines = html.unescape(env.from_string(TEMPLATE).render()).split("\n")  # as printed
    assert max(map(len, lines)) <= 118
    words = messages.Words(lang)
    head = "\n".join(lines[:2])
    for key in ("col_event_no", "col_position", "col_event", "col_event_loss", "col_loss_avg",
                "col_remeasured", "col_reflectance", "col_allowance_short"):
        assert words[key] in head, key
