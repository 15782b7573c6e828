"""results.csv: one row per result row read, with the engine's limit, margin and verdict."""
from __future__ import annotations

import io
import math
from typing import Final

import pandas as pd

from reportgen.units import format_db, round_length_m

# dB values (loss, limit, margin) are written as the report prints them: text with
# exactly two decimals (reportgen.units.format_db); the measured length in metres is
# a number rounded to 0.01 m (units.round_length_m). Flags and instrument ids, lists
# in the judged frame, are joined with ";" only here, in the cell.
LIST_SEPARATOR: Final = ";"

RESULTS_COLUMNS: Final = (
    "link_id", "strand", "wavelength_nm", "direction", "loss_db", "tested_at", "limit_db",
    "margin_db", "verdict", "flags", "technician", "instrument", "measured_length_m", "note",
    "source_file", "source_line", "source",
)
_TEXT_COLUMNS: Final = ("link_id", "direction", "tested_at", "verdict", "flags", "technician",
                        "instrument", "note", "source_file", "source")
# Spreadsheet programs treat a cell starting with one of these as a formula.
_FORMULA_STARTS: Final = ("=", "+", "-", "@", "\t", "\r")


def neutralise_cell(text: str) -> str:
    """Prefix text that a spreadsheet would run as a formula with an apostrophe."""
    return "'" + text if text.startswith(_FORMULA_STARTS) else text


def results_csv_bytes(results: pd.DataFrame) -> bytes:
    """One row per result row read (superseded and invalid included), in input order."""
    frame = pd.DataFrame({
        "link_id": results["link_id"],
        "strand": results["strand"],
        "wavelength_nm": results["wavelength_nm"],
        "direction": results["direction"],
        "loss_db": results["loss_db"].map(_db_text),
        "tested_at": results["tested_at_text"],
        "limit_db": results["limit_db"].map(_db_text),
        "margin_db": results["margin_db"].map(_db_text),
        "verdict": results["verdict"],
        "flags": results["flags"].map(LIST_SEPARATOR.join),
        "technician": results["technician"],
        "instrument": results["instrument"].map(LIST_SEPARATOR.join),
        "measured_length_m": results["measured_length_m"].map(round_length_m),
        "note": results["note"],
        "source_file": results["source_file"],
        "source_line": results["source_line"],
        "source": results["source"],
    }, columns=list(RESULTS_COLUMNS))
    for column in _TEXT_COLUMNS:
        frame[column] = frame[column].fillna("").astype(str).map(neutralise_cell)
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False, lineterminator="\n")
    return buffer.getvalue().encode("utf-8")


def _db_text(value: float) -> str:
    """A dB value as the report prints it; empty where there is none (NaN)."""
    return "" if math.isnan(value) else format_db(value)
