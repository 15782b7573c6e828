"""results.csv: one row per result row read, with the engine's limit, margin and verdict."""
from __future__ import annotations

import io
import math
from typing import Final

import pandas as pd

# Computed dB values are written with the report's resolution (0.01 dB, the resolution
# of the meters' results), rounded the same way, so every number in the report
# appears identically here.
DECIMALS: Final = 2

RESULTS_COLUMNS: Final = (
    "link_id", "strand", "wavelength_nm", "direction", "loss_db", "tested_at", "limit_db",
    "margin_db", "verdict", "flags", "technician", "instrument", "measured_length_m", "note",
    "source_file", "source_line",
)
_TEXT_COLUMNS: Final = ("link_id", "direction", "tested_at", "verdict", "flags", "technician",
                        "instrument", "note", "source_file")
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
        "loss_db": results["loss_db"],
        "tested_at": results["tested_at_text"],
        "limit_db": results["limit_db"].map(_rounded),
        "margin_db": results["margin_db"].map(_rounded),
        "verdict": results["verdict"],
        "flags": results["flags"],
        "technician": results["technician"],
        "instrument": results["instrument"],
        "measured_length_m": results["measured_length_m"].round(3),
        "note": results["note"],
        "source_file": results["source_file"],
        "source_line": results["source_line"],
    }, columns=list(RESULTS_COLUMNS))
    for column in _TEXT_COLUMNS:
        frame[column] = frame[column].fillna("").astype(str).map(neutralise_cell)
    buffer = io.StringIO()
    frame.to_csv(buffer, index=False, lineterminator="\n")
    return buffer.getvalue().encode("utf-8")


def _rounded(value: float) -> float:
    """Round like the report's number format (correctly rounded, no negative zero)."""
    if math.isnan(value):
        return value
    rounded = float(f"{value:.{DECIMALS}f}")
    return rounded + 0.0 if rounded == 0 else rounded


def _number(value: float | None) -> float | None:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    return _rounded(float(value))


