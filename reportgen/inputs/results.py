"""Checking results/*.csv tables column by column, vectorised (no Python loop per row).

A result row is checked against the links (strand range, wavelengths the limit set
defines for the link's fiber type and plant) and the instruments of project.yaml.
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Final

import numpy as np
import pandas as pd

from reportgen.inputs.csvread import CsvTable
from reportgen.errors import InputProblem
from reportgen.inputs.checker import DECIMAL_COMMA_TEXT, DECIMAL_HINT, NUMBER_TEXT, WAVELENGTH_RANGE_NM, by_lower_case, closest
from reportgen.inputs.files import clip
from reportgen.model import (RESULT_COLUMNS, ApplicationTable, Direction, Instrument, LengthUnit,
                             LimitSet, Link, Plant)
from reportgen.units import M_PER_FT

REQUIRED: Final = (("link_id",), ("wavelength_nm",), ("loss_db",), ("tested_at",))
LENGTH_COLUMNS: Final = ("length", "length_m", "length_ft")
REQUIRED_NAMES: Final = tuple(group[0] for group in REQUIRED)
OPTIONAL: Final = ("strand", "direction", "instrument", "technician", "note", *LENGTH_COLUMNS)
MAX_LOSS_DB: Final = 100.0
MAX_STRAND: Final = 1000  # as links.csv strands
MAX_LENGTH_M: Final = 200_000.0  # 200 km
MAX_HINTED: Final = 100  # unknown link ids per file given a "did you mean"
YEAR_RANGE: Final = (1900, 2199)
EMPTY: Final = " (the cell is empty)"


@dataclass(frozen=True)
class Context:
    """What a results row is checked against; None where project.yaml or links.csv failed."""

    links: Mapping[str, Link] | None  # valid links by id
    all_link_ids: frozenset[str] | None  # every link_id in links.csv, valid rows or not
    limits: LimitSet | None
    instruments: tuple[Instrument, ...] | None
    units: LengthUnit | None
    # The application table: a wavelength the limit set lacks is accepted for a link when an
    # application the link lists needs it (a PON class at 1490 nm), not judged by the cabling limit.
    applications: ApplicationTable | None = None
    links_from: str = "links.csv"  # where the links were read, as messages name it


def application_wavelengths_nm(link: Link, limits: LimitSet,
                               applications: ApplicationTable | None) -> tuple[int, ...]:
    """Test wavelengths [nm] the link's listed applications need and the limit set lacks.

    Results there are accepted (not judged against the cabling limit, counted for the
    application); sorted, without repeats.
    """
    if applications is None or not link.applications:
        return ()
    defined = set(limits.wavelengths_nm(link.fiber_type, link.plant))
    needed: set[int] = set()
    for application_id in link.applications:
        if application_id not in applications:
            continue
        entry = applications.get(application_id)
        if entry.limits_for(link.fiber_type) is not None:
            needed |= set(entry.test_wavelengths_nm)
    return tuple(sorted(needed - defined))


class _Collector:
    """Problems of one file as (row, check order, problem), sorted at the end."""

    def __init__(self, table: CsvTable) -> None:
        self.table = table
        # required columns the header lacks: that is one header problem, not one per row
        self.absent = {name for name in REQUIRED_NAMES if not table.has(name)}
        self.items: list[tuple[int, int, InputProblem]] = []
        self.order = 0

    def add(self, mask: np.ndarray, column: str, expected, found) -> None:
        """One problem for every row where ``mask`` is true; ``expected`` may be a function of the row."""
        self.order += 1
        if column in self.absent:
            return
        for row in np.flatnonzero(mask):
            if self.table.lines[row] in self.table.unreadable:
                continue
            text = expected(row) if callable(expected) else expected
            value = found(row) if callable(found) else None if found is None else found[row]
            shown = None if value is None else clip(str(value))
            self.items.append((row, self.order, InputProblem(
                self.table.file, self.table.lines[row], column, text, shown)))

    def sorted(self) -> list[InputProblem]:
        return [problem for _, _, problem in sorted(self.items, key=lambda item: item[:2])]


def _numbers(texts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Float values (NaN where empty or bad) and the mask of non-empty cells that are not finite numbers."""
    if len(texts) == 0:
        return np.zeros(0), np.zeros(0, bool)
    codes, uniques = pd.factorize(texts)
    numbers = np.array([float(text) if NUMBER_TEXT.fullmatch(text) else np.nan for text in uniques],
                       dtype=float)
    bad_unique = (uniques != "") & ~np.isfinite(numbers)
    numbers[bad_unique] = np.nan
    return numbers[codes], bad_unique[codes]


def _number_hint(texts: np.ndarray, row: int) -> str:
    return DECIMAL_HINT if DECIMAL_COMMA_TEXT.fullmatch(texts[row]) else ""


def _link_hints(unique_ids: np.ndarray, defined: np.ndarray, all_link_ids: frozenset[str]) -> list[str]:
    """" (did you mean A-BB-01?)" for each unknown id that differs from a link_id of links.csv only
    in case or is close to one; difflib is asked for the first MAX_HINTED unknown ids only."""
    hints = [""] * len(unique_ids)
    if defined.all():
        return hints
    known = by_lower_case(all_link_ids)
    asked = 0
    for index in np.flatnonzero(~defined):
        if unique_ids[index] == "" or asked >= MAX_HINTED:
            continue
        asked += 1
        meant = closest(unique_ids[index], known)
        if meant is not None:
            hints[index] = f" (did you mean {clip(meant)}?)"
    return hints


def _whole(values: np.ndarray) -> np.ndarray:
    return np.isfinite(values) & (values == np.floor(values))


def check_results(table: CsvTable, context: Context) -> tuple[pd.DataFrame | None, list[InputProblem]]:
    """Check one results table; the DataFrame (``RESULT_COLUMNS``) only when it has no problem."""
    out = _Collector(table)
    n = len(table)
    column = {name: np.array(table.columns[name], dtype=object) if name in table.columns
              else np.full(n, "", dtype=object) for name in (*REQUIRED_NAMES, *OPTIONAL)}

    # link_id
    link_ids = column["link_id"]
    empty_id = link_ids == ""
    out.add(empty_id, "link_id", "a link_id from links.csv" + EMPTY, None)
    id_codes, unique_ids = pd.factorize(link_ids)
    if context.all_link_ids is not None:
        defined = np.array([link_id in context.all_link_ids for link_id in unique_ids], dtype=bool)
        unknown = ~empty_id & ~defined[id_codes] if len(id_codes) else empty_id
        hints = _link_hints(unique_ids, defined, context.all_link_ids)
        out.add(unknown, "link_id", lambda row: f"a link_id defined in {context.links_from}{hints[id_codes[row]]}",
                link_ids)
    links = context.links or {}
    unique_links = [links.get(link_id) for link_id in unique_ids]

    def per_link(value, default) -> np.ndarray:
        """A property of each row's link (``default`` where the link is not a valid one)."""
        table = np.array([default if link is None else value(link) for link in unique_links] + [default])
        return table[id_codes] if len(id_codes) else table[:0]

    has_link = per_link(lambda link: True, False).astype(bool)

    # strand
    strand_text = column["strand"]
    strand_values, strand_bad = _numbers(strand_text)
    strand_values[strand_text == ""] = 1
    strands = per_link(lambda link: float(link.strands), np.nan).astype(float)
    strand_bad |= ~strand_bad & ~_whole(strand_values)
    strand_bad |= (strand_values < 1) | (strand_values > MAX_STRAND) | (has_link & (strand_values > strands))

    def strand_expected(row: int) -> str:
        if has_link[row]:
            return f"a strand from 1 to {int(strands[row])} for link {clip(link_ids[row])}"
        return f"a strand number, a whole number from 1 to {MAX_STRAND}"

    out.add(strand_bad, "strand", strand_expected, strand_text)

    # wavelength_nm
    wavelength_text = column["wavelength_nm"]
    wavelengths, wavelength_bad = _numbers(wavelength_text)
    low_nm, high_nm = WAVELENGTH_RANGE_NM
    wavelength_bad |= ~wavelength_bad & (wavelength_text != "") & (
        ~_whole(wavelengths) | (wavelengths < low_nm) | (wavelengths > high_nm))
    allowed_text = np.full(n, "", dtype=object)
    if context.limits is not None and links:
        limits = context.limits

        def group(link: Link) -> tuple:
            return (link.fiber_type, link.plant,
                    application_wavelengths_nm(link, limits, context.applications))

        groups = sorted({group(link) for link in links.values()})
        index_of = {key: index for index, key in enumerate(groups)}
        group_of = per_link(lambda link: index_of[group(link)], -1).astype(int)
        for index, (fiber, plant, extra) in enumerate(groups):
            allowed = limits.wavelengths_nm(fiber, plant) + extra
            outside = (plant is Plant.OUTSIDE
                       and fiber in limits.attenuation_db_per_km_outside)
            described = (f"one of {', '.join(map(str, limits.wavelengths_nm(fiber, plant)))} "
                         f"for {fiber.value}" + (", outside plant" if outside else "")
                         + (f", or {', '.join(map(str, extra))} for the link's applications"
                            if extra else ""))
            in_group = group_of == index
            allowed_text[in_group] = described
            wavelength_bad |= in_group & (wavelength_text != "") & ~np.isin(wavelengths, allowed)
    empty_wavelength = wavelength_text == ""

    def wavelength_expected(row: int) -> str:
        described = allowed_text[row] or f"a wavelength in whole nm from {low_nm} to {high_nm}"
        return described + (EMPTY if empty_wavelength[row] else "")

    out.add(wavelength_bad | empty_wavelength, "wavelength_nm", wavelength_expected,
            np.where(empty_wavelength, None, wavelength_text))

    # direction
    direction_text = np.char.lower(column["direction"].astype(str)).astype(object)
    direction_text[direction_text == ""] = Direction.AB.value
    direction_bad = ~np.isin(direction_text, [member.value for member in Direction])
    out.add(direction_bad, "direction", "one of ab, ba", column["direction"])

    # loss_db
    loss_text = column["loss_db"]
    losses, loss_bad = _numbers(loss_text)
    empty_loss = loss_text == ""
    loss_bad |= losses > MAX_LOSS_DB
    out.add(empty_loss, "loss_db", f"a loss in dB, a number of at most {MAX_LOSS_DB:g}" + EMPTY, None)
    out.add(loss_bad, "loss_db",
            lambda row: f"a loss in dB, a number of at most {MAX_LOSS_DB:g}{_number_hint(loss_text, row)}",
            loss_text)

    # tested_at
    tested_text = column["tested_at"]
    tested_at, tested_bad = _timestamps(tested_text)
    empty_tested = tested_text == ""
    out.add(empty_tested, "tested_at", "an ISO 8601 date or date-time" + EMPTY, None)
    out.add(tested_bad & ~empty_tested, "tested_at",
            f"an ISO 8601 date or date-time between the years {YEAR_RANGE[0]} and {YEAR_RANGE[1]}, "
            "e.g. 2030-01-15 or 2030-01-15T14:05", tested_text)

    # instrument
    instrument_ids, instrument_bad, unknown_ids = _instrument_ids(column["instrument"], context.instruments)
    known = ", ".join(instrument.id for instrument in context.instruments or ()) or "none are listed"
    out.add(instrument_bad, "instrument",
            f"ids of instruments listed in project.yaml ({known}), separated by ';'", unknown_ids)

    # measured length
    measured_m = _measured_length(column, table, context.units, out)

    problems = out.sorted()
    # rows too long to read (table.unreadable) are reported by read_csv and were not checked
    # here: the run fails anyway, and their unchecked cells must not reach the frame
    if problems or out.absent or table.unreadable:
        return None, problems
    frame = pd.DataFrame({
        "source_file": pd.Series([table.file] * n, dtype="str"),
        "source_line": np.asarray(table.lines, dtype=np.int64),
        "link_id": pd.Series(link_ids, dtype="str"),
        "strand": strand_values.astype(np.int64),
        "wavelength_nm": wavelengths.astype(np.int64),
        "direction": pd.Series(direction_text, dtype="str"),
        "loss_db": losses.astype(np.float64),
        "tested_at": tested_at,
        "tested_at_text": pd.Series(tested_text, dtype="str"),
        "instrument": pd.Series(instrument_ids, dtype=object),
        "technician": pd.Series(column["technician"], dtype="str"),
        "measured_length_m": measured_m,
        "note": pd.Series(column["note"], dtype="str"),
        "source": table.file + ":" + pd.Series(table.lines, dtype="str"),
    }, columns=list(RESULT_COLUMNS))
    return frame, []


def empty_results() -> pd.DataFrame:
    """A results DataFrame with no rows and the dtypes of ``RESULT_COLUMNS``."""
    text = pd.Series([], dtype="str")
    return pd.DataFrame({
        "source_file": text, "source_line": np.zeros(0, np.int64), "link_id": text,
        "strand": np.zeros(0, np.int64), "wavelength_nm": np.zeros(0, np.int64), "direction": text,
        "loss_db": np.zeros(0, np.float64), "tested_at": np.zeros(0, "datetime64[ns]"),
        "tested_at_text": text, "instrument": pd.Series([], dtype=object), "technician": text,
        "measured_length_m": np.zeros(0, np.float64), "note": text, "source": text,
    }, columns=list(RESULT_COLUMNS))


def _parse_timestamp(text: str) -> datetime | None:
    """ISO 8601 date or date-time; an aware time is converted to UTC and made naive."""
    try:
        moment = datetime.fromisoformat(text)
    except ValueError:
        return None
    if moment.tzinfo is not None:
        try:
            moment = moment.astimezone(timezone.utc).replace(tzinfo=None)
        except OverflowError:  # e.g. 0001-01-01T00:00+01:00 falls before year 1
            return None
    if not YEAR_RANGE[0] <= moment.year <= YEAR_RANGE[1]:
        return None
    return moment


def _timestamps(texts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Timestamps (naive, datetime64[ns]) and the mask of cells that are not ISO 8601 dates."""
    if len(texts) == 0:
        return np.zeros(0, "datetime64[ns]"), np.zeros(0, bool)
    codes, uniques = pd.factorize(texts)
    parsed = [_parse_timestamp(text) if text else None for text in uniques]
    bad_unique = np.array([moment is None for moment in parsed], dtype=bool)
    placeholder = datetime(2000, 1, 1)
    moments = pd.Series([placeholder if moment is None else moment for moment in parsed], dtype=object)
    values = pd.to_datetime(moments).to_numpy().astype("datetime64[ns]")
    values[bad_unique] = np.datetime64("NaT")
    return values[codes], bad_unique[codes]


def _instrument_ids(texts: np.ndarray, instruments: tuple[Instrument, ...] | None
                    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Each cell's instrument ids as a tuple (split at ';', blanks dropped), the mask of
    cells naming unknown ids, and those ids as written for the message."""
    codes, uniques = pd.factorize(texts)
    known = None if instruments is None else {instrument.id for instrument in instruments}
    ids = np.empty(len(uniques), dtype=object)
    unknown = np.empty(len(uniques), dtype=object)
    for at, text in enumerate(uniques):
        parts = tuple(part.strip() for part in text.split(";") if part.strip())
        ids[at] = parts
        unknown[at] = ";".join(part for part in parts if known is not None and part not in known)
    if len(texts) == 0:
        empty = np.zeros(0, dtype=object)
        return empty, np.zeros(0, bool), empty
    unknown_array = unknown[codes]
    return ids[codes], unknown_array != "", unknown_array


def _measured_length(column: Mapping[str, np.ndarray], table: CsvTable, units: LengthUnit | None,
                     out: _Collector) -> np.ndarray:
    """Measured length [m] from length, length_m or length_ft (NaN when not given)."""
    n = len(table)
    present = [name for name in LENGTH_COLUMNS if name in table.columns]
    given = np.zeros(n, dtype=int)
    for name in present:
        given += column[name] != ""
    out.add(given > 1, "/".join(present), "a length in only one of these columns",
            lambda row: " and ".join(column[name][row] for name in present if column[name][row]))
    measured_m = np.full(n, np.nan)
    for name in present:
        values, bad = _numbers(column[name])
        unit = {"length_m": LengthUnit.M, "length_ft": LengthUnit.FT}.get(name, units)
        factor = {LengthUnit.M: 1.0, LengthUnit.FT: M_PER_FT}.get(unit, np.nan)
        metres = values * factor
        bad |= (column[name] != "") & ~bad & ((values <= 0) | (metres > MAX_LENGTH_M))
        unit_text = "" if unit is None else f" in {unit.value}"
        out.add(bad, name, lambda row, unit_text=unit_text, name=name: (
            f"a measured length{unit_text}, greater than 0 and at most 200 km"
            f"{_number_hint(column[name], row)}"), column[name])
        take = (column[name] != "") & ~bad
        measured_m[take] = metres[take]
    return measured_m
