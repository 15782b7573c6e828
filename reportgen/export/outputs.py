"""Export: results.csv, summary.json and the report files, written atomically.

Nothing here decides anything: it serialises what the engine concluded and
moves finished files into place. Every output is first written completely to a
hidden temporary file in the output folder, flushed to disk, and only then
renamed over its target (``os.replace``), so an interrupted build leaves the
previous outputs whole and readable and never a half-written file.
"""
from __future__ import annotations

import io
import json
import math
import os
import tempfile
from collections.abc import Mapping
from pathlib import Path
from typing import Any, Final

import pandas as pd

from .judge import Judgement
from .model import Project

OUTPUT_NAMES: Final = ("report.html", "report.pdf", "results.csv", "summary.json")
TEMP_PREFIX: Final = ".reportgen-partial-"
SUMMARY_FORMAT: Final = 1
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


def summary_dict(project: Project, judgement: Judgement,
                 link_extras: Mapping[str, Mapping[str, Any]] | None = None,
                 meta: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """The summary.json document: format 1 of the contract plus added keys."""
    links = []
    for outcome in judgement.links:
        entry: dict[str, Any] = {
            "link_id": outcome.link_id,
            "verdict": outcome.verdict.value,
            "worst_margin_db": _number(outcome.worst_margin_db),
            "missing": [
                {"strand": m.strand, "wavelength_nm": m.wavelength_nm,
                 "direction": m.direction, "reason": m.reason}
                for m in outcome.missing
            ],
        }
        entry.update((link_extras or {}).get(outcome.link_id, {}))
        links.append(entry)
    document: dict[str, Any] = {"format": SUMMARY_FORMAT, "links": links,
                                "totals": judgement.totals}
    document.update(meta or {})
    return document


def json_bytes(document: Mapping[str, Any]) -> bytes:
    return (json.dumps(document, indent=2, ensure_ascii=False, allow_nan=False) + "\n").encode()


def write_outputs(out_dir: Path, outputs: Mapping[str, bytes]) -> None:
    """Write all outputs, each atomically; called only after everything is rendered.

    Outputs of ours that this build does not produce are removed so that no
    stale file sits beside new ones; leftovers of an interrupted earlier build
    (hidden temporary files) are cleaned up.
    """
    out_dir.mkdir(parents=True, exist_ok=True)
    for leftover in out_dir.glob(f"{TEMP_PREFIX}*"):
        leftover.unlink(missing_ok=True)
    staged: list[tuple[str, Path]] = []
    try:
        for name, data in outputs.items():
            staged.append((name, _stage(out_dir, name, data)))
        for name in OUTPUT_NAMES:
            if name not in outputs:
                (out_dir / name).unlink(missing_ok=True)
        for name, temp in staged:
            os.replace(temp, out_dir / name)
    finally:
        for _, temp in staged:
            temp.unlink(missing_ok=True)
    _fsync_dir(out_dir)


def _stage(out_dir: Path, name: str, data: bytes) -> Path:
    fd, temp_name = tempfile.mkstemp(prefix=f"{TEMP_PREFIX}{name}.", dir=out_dir)
    temp = Path(temp_name)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(temp, 0o644)
    except BaseException:
        temp.unlink(missing_ok=True)
        raise
    return temp


def _fsync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)
