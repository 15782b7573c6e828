"""Builders of in-memory model objects for engine tests (no files involved)."""
from __future__ import annotations

from pathlib import Path

import pandas as pd

from reportgen.inputs.apptable import load_applications
from reportgen.model import (
    RESULT_COLUMNS,
    Contractor,
    Directions,
    FiberType,
    LimitSet,
    Link,
    Plant,
    Project,
    ProjectInfo,
    ReferenceMethod,
    Testing,
)

# Coefficients for arithmetic tests: test inputs, NOT a standard's values.
TEST_LIMITS = LimitSet(
    id="test-set",
    title="Round numbers for hand-worked tests",
    source="test input",
    connection_db=0.5,
    splice_db=0.1,
    attenuation_db_per_km={
        FiberType.OM4: {850: 2.0, 1300: 1.0},
        FiberType.OS2: {1310: 0.4, 1550: 0.3},
    },
    attenuation_db_per_km_outside={FiberType.OS2: {1310: 0.2, 1550: 0.1}},
)


def make_link(link_id: str = "L1", **fields) -> Link:
    defaults = dict(end_a="A", end_b="B", fiber_type=FiberType.OM4, length_m=500.0)
    defaults.update(fields)
    return Link(link_id=link_id, **defaults)


def make_results(rows: list[dict]) -> pd.DataFrame:
    """Result rows with defaults: strand 1, direction ab, file r.csv, line = index + 2."""
    full = []
    for index, row in enumerate(rows):
        tested = row.get("tested_at", "2030-01-15")
        full.append({
            "source_file": row.get("source_file", "results/r.csv"),
            "source_line": row.get("source_line", index + 2),
            "link_id": row.get("link_id", "L1"),
            "strand": row.get("strand", 1),
            "wavelength_nm": row["wavelength_nm"],
            "direction": row.get("direction", "ab"),
            "loss_db": float(row["loss_db"]),
            "tested_at": pd.Timestamp(tested),
            "tested_at_text": tested,
            "instrument": tuple(row.get("instrument", ())),  # instrument ids
            "technician": row.get("technician", ""),
            "measured_length_m": row.get("measured_length_m", float("nan")),
            "note": row.get("note", ""),
        })
    frame = pd.DataFrame(full, columns=list(RESULT_COLUMNS))
    return frame.astype({"strand": "int64", "wavelength_nm": "int64", "loss_db": "float64",
                         "source_line": "int64", "measured_length_m": "float64",
                         "tested_at": "datetime64[ns]"})


def make_project(links, results, *, limits=TEST_LIMITS, method=ReferenceMethod.ONE_CORD,
                 directions=Directions.BOTH, uncertainty_db=0.0, components=None,
                 instruments=(), wavelengths=None, transceivers=None) -> Project:
    testing_fields = dict(limits=limits.id, reference_method=method, directions=directions,
                          uncertainty_db=uncertainty_db)
    if wavelengths is not None:
        testing_fields["wavelengths_nm"] = wavelengths
    return Project(
        root=Path("."),
        info=ProjectInfo(title="T", contractor=Contractor(name="C")),
        testing=Testing(**testing_fields),
        links=tuple(links),
        results=make_results(results),
        limits=limits,
        components=components or {},
        transceivers=transceivers or {},
        instruments=tuple(instruments),
        applications=load_applications(),
    )


__all__ = ["TEST_LIMITS", "make_link", "make_results", "make_project", "Plant"]
