"""Imported rows written back as the project format's own CSV files (``reportgen import --write``).

links.csv and results CSV files with the contract's column names (docs/project-format.md), values
as they were read: numbers with a decimal point, dates and times in ISO 8601, lists joined with
";". A folder of these files plus project.yaml builds like the imports did.
"""
from __future__ import annotations

import csv
import io
import math
from collections.abc import Iterable, Sequence
from typing import Final

import pandas as pd

from reportgen.model import Link

LINK_COLUMNS: Final = ("link_id", "end_a", "end_b", "fiber_type", "plant", "length_m", "strands",
                       "connections", "splices", "components", "applications", "transceiver", "notes")
RESULT_COLUMNS: Final = ("link_id", "strand", "wavelength_nm", "direction", "loss_db", "tested_at",
                         "instrument", "technician", "note", "length_m")


def number_text(value: float) -> str:
    """A number as read, with a decimal point and no needless ``.0``; empty for NaN."""
    if math.isnan(value):
        return ""
    return str(int(value)) if float(value).is_integer() else repr(float(value))


def _csv(columns: Sequence[str], rows: Iterable[Sequence[object]]) -> bytes:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    writer.writerows(rows)
    return buffer.getvalue().encode("utf-8")


def links_csv_bytes(links: Iterable[Link]) -> bytes:
    """links.csv of ``links``, in the order given."""
    return _csv(LINK_COLUMNS, (
        (link.link_id, link.end_a, link.end_b, link.fiber_type.value, link.plant.value,
         number_text(link.length_m), link.strands, link.connections, link.splices,
         ";".join(link.components), ";".join(link.applications), link.transceiver or "",
         link.notes or "") for link in links))


def results_rows_csv_bytes(results: pd.DataFrame) -> bytes:
    """A results CSV file of the rows of ``results`` (``Project.results`` columns), in order."""
    return _csv(RESULT_COLUMNS, zip(
        results["link_id"], results["strand"], results["wavelength_nm"], results["direction"],
        results["loss_db"].map(number_text), results["tested_at_text"],
        results["instrument"].map(";".join), results["technician"], results["note"],
        results["measured_length_m"].map(number_text)))
