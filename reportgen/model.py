"""The validated project: frozen dataclasses and closed vocabularies.

Results are kept as one pandas DataFrame (see ``RESULT_COLUMNS``) so that the
engine can judge them without a Python loop per row.
"""
from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import date, datetime
from enum import StrEnum
from pathlib import Path
from typing import Any, Final

import pandas as pd


class FiberType(StrEnum):
    OM1 = "OM1"
    OM2 = "OM2"
    OM3 = "OM3"
    OM4 = "OM4"
    OM5 = "OM5"
    OS1 = "OS1"
    OS1A = "OS1a"
    OS2 = "OS2"

    @property
    def category(self) -> FiberCategory:
        return FiberCategory.MULTIMODE if self.value.startswith("OM") else FiberCategory.SINGLEMODE


class FiberCategory(StrEnum):
    MULTIMODE = "multimode"
    SINGLEMODE = "singlemode"


class Plant(StrEnum):
    INSIDE = "inside"
    OUTSIDE = "outside"


class ReferenceMethod(StrEnum):
    ONE_CORD = "one-cord"
    TWO_CORD = "two-cord"
    THREE_CORD = "three-cord"


class Directions(StrEnum):
    BOTH = "both"
    ONE = "one"


class Direction(StrEnum):
    AB = "ab"
    BA = "ba"


class LengthUnit(StrEnum):
    M = "m"
    FT = "ft"


class InstrumentKind(StrEnum):
    LIGHT_SOURCE = "light-source"
    POWER_METER = "power-meter"
    OTDR = "otdr"
    TEST_CORD = "test-cord"
    OTHER = "other"


class Paper(StrEnum):
    A4 = "a4"
    LETTER = "letter"


class ReportLanguage(StrEnum):
    """The languages a report can be written in (report.language, build --language)."""
    EN = "en"
    DE = "de"
    FR = "fr"
    ES = "es"


class ResultVerdict(StrEnum):
    PASS = "pass"
    FAIL = "fail"
    INVALID = "invalid"
    SUPERSEDED = "superseded"
    NOT_JUDGED = "not-judged"  # no cabling limit at this wavelength (counted for applications)


class LinkVerdict(StrEnum):
    PASS = "pass"
    FAIL = "fail"
    INCOMPLETE = "incomplete"


class ResultFlag(StrEnum):
    """Flags on a result row (``flags`` column of results.csv)."""

    WITHIN_UNCERTAINTY = "within-uncertainty"  # |margin| <= uncertainty_db
    NEGATIVE_LOSS = "negative-loss"  # loss below 0; below -uncertainty_db also invalid
    RETEST = "retest"  # judged row that superseded earlier rows of the same key
    CALIBRATION_OVERDUE = "calibration-overdue"  # an instrument used after its due date
    NOT_REQUIRED = "not-required"  # wavelength judged but not in the required set
    NO_CABLING_LIMIT = "no-cabling-limit"  # the limit set has no attenuation here: not judged


# Default required wavelengths per fiber category [nm] (common practice: the two
# windows of each category; overridable with testing.wavelengths).
DEFAULT_WAVELENGTHS_NM: Final[Mapping[FiberCategory, tuple[int, ...]]] = {
    FiberCategory.MULTIMODE: (850, 1300),
    FiberCategory.SINGLEMODE: (1310, 1550),
}

# Attenuator values offered for an overloaded receiver [dB] (common practice).
DEFAULT_ATTENUATORS_DB: Final[tuple[float, ...]] = (1, 2, 3, 5, 7, 10, 15, 20)


@dataclass(frozen=True)
class Logo:
    """The contractor's logo, read and checked by the inputs stage (kind, size, content)."""

    path: Path  # resolved absolute path inside the project folder
    mime: str  # "image/svg+xml", "image/png" or "image/jpeg"
    data: bytes = field(repr=False)


@dataclass(frozen=True)
class Contractor:
    name: str
    address: str | None = None
    phone: str | None = None
    email: str | None = None
    logo: Logo | None = None


@dataclass(frozen=True)
class ProjectInfo:
    title: str
    contractor: Contractor
    site: str | None = None
    customer: str | None = None
    job_number: str | None = None
    work_started: date | None = None  # project.work_started


class Severity(StrEnum):
    """How much an audit finding weighs: an error blocks acceptance."""

    ERROR = "error"
    WARNING = "warning"
    NOTE = "note"


@dataclass(frozen=True)
class AuditSettings:
    """Thresholds of the audit rules (``testing.audit`` in project.yaml).

    Defaults and their sources: docs/project-format.md, "Audit findings";
    ``reportgen.engine.findings.RULES`` names which rule uses which key.
    """

    asymmetry_db: float = 0.5  # |A->B - B->A| above this: a warning
    rayleigh_db_um4_per_km: float = 0.7  # fiber loss floor: this / (wavelength in um)^4 [dB/km]
    low_loss_connection_db: float = 0.02  # loss a mated connection surely adds [dB]
    repeat_count: int = 6  # this many identical readings of one link and wavelength (or in a row)
    min_length_inside_m: float = 1.0
    min_length_outside_m: float = 10.0
    length_tolerance_percent: float = 10.0  # measured vs documented length
    length_tolerance_m: float = 5.0  # added to the percentage
    reference_max_age_h: float = 24.0
    cord_check_max_db: float = 0.2  # test cord verification reading, at most


@dataclass(frozen=True)
class Testing:
    limits: str  # built-in id or a path inside the project folder, as written
    reference_method: ReferenceMethod
    directions: Directions = Directions.BOTH
    uncertainty_db: float = 0.0
    units: LengthUnit = LengthUnit.M
    wavelengths_nm: Mapping[FiberCategory, tuple[int, ...]] = field(
        default_factory=lambda: dict(DEFAULT_WAVELENGTHS_NM)
    )
    attenuators_db: tuple[float, ...] = DEFAULT_ATTENUATORS_DB
    audit: AuditSettings = field(default_factory=AuditSettings)
    required_reference_method: ReferenceMethod | None = None  # the customer's specification
    period_start: date | None = None  # testing.period: results expected within these days
    period_end: date | None = None
    otdr: OtdrSettings | None = None  # testing.otdr; None: defaults (docs §12)


@dataclass(frozen=True)
class Component:
    id: str
    loss_db: float
    description: str | None = None


@dataclass(frozen=True)
class Transceiver:
    id: str
    wavelength_nm: int
    tx_min_dbm: float
    tx_max_dbm: float
    rx_min_average_dbm: float  # lowest average receive power (key rx_min_average_dbm), not OMA sensitivity
    rx_overload_dbm: float
    description: str | None = None


@dataclass(frozen=True)
class Instrument:
    id: str
    kind: InstrumentKind
    model: str | None = None
    serial: str | None = None
    calibration_due: date | None = None
    description: str | None = None


@dataclass(frozen=True)
class ReportOptions:
    paper: Paper = Paper.A4
    templates: Path | None = None  # resolved folder inside the project folder
    language: ReportLanguage = ReportLanguage.EN
    # OTDR trace files embedded in report.pdf: each at most, all together at most (MB, 10**6 bytes)
    otdr_file_mb: float = 2.0
    otdr_total_mb: float = 50.0
    tagged: bool = False  # render report.pdf with its structure tree (Tagged PDF)


@dataclass(frozen=True)
class Link:
    link_id: str
    end_a: str
    end_b: str
    fiber_type: FiberType
    length_m: float
    plant: Plant = Plant.INSIDE
    strands: int = 1
    connections: int = 0
    splices: int = 0
    components: tuple[str, ...] = ()  # ids from Project.components, in the order given
    applications: tuple[str, ...] = ()
    transceiver: str | None = None
    notes: str | None = None
    line: int = 0  # line in links.csv

    @property
    def length_km(self) -> float:
        return self.length_m / 1000.0


# Columns of Project.results, one row per results/*.csv row, in file order
# (files sorted by name, then line):
#   source_file (str, relative path), source_line (int), link_id (str), strand (int),
#   wavelength_nm (int), direction (str: "ab"/"ba"), loss_db (float),
#   tested_at (pandas Timestamp, naive; tz-aware inputs converted to UTC),
#   tested_at_text (str, as written), instrument (tuple of instrument ids, () when none),
#   technician (str or ""), measured_length_m (float or NaN), note (str or ""),
#   source (str: "file:line", for a spreadsheet row "file[sheet]:row"; imported rows name the
#   original file and its row or line)
RESULT_COLUMNS: Final[tuple[str, ...]] = (
    "source_file",
    "source_line",
    "link_id",
    "strand",
    "wavelength_nm",
    "direction",
    "loss_db",
    "tested_at",
    "tested_at_text",
    "instrument",
    "technician",
    "measured_length_m",
    "note",
    "source",
)


class LinkEnd(StrEnum):
    A = "a"
    B = "b"


class InspectionResult(StrEnum):
    PASS = "pass"
    FAIL = "fail"


@dataclass(frozen=True)
class Reference:
    """One row of ``references/*.csv``: a meter referenced at one wavelength."""

    instrument: str  # the power meter (an instrument id)
    wavelength_nm: int
    reference_dbm: float
    set_at: datetime
    cords: tuple[str, ...]  # test cord instrument ids
    method: ReferenceMethod
    cord_check_db: float | None  # test cord verification reading, None when not recorded
    source_file: str
    source_line: int


@dataclass(frozen=True)
class InspectionImage:
    """An end-face picture, downscaled by the inputs stage (see inputs/records.py)."""

    path: str  # project-relative, as written
    mime: str
    data: bytes = field(repr=False)
    width: int = 0
    height: int = 0


@dataclass(frozen=True)
class Inspection:
    """One row of ``inspections/*.csv``: an end face of one strand at one link end."""

    link_id: str
    strand: int
    end: LinkEnd
    result: InspectionResult
    inspected_at: datetime
    criteria: str | None
    technician: str | None
    image: InspectionImage | None
    source_file: str
    source_line: int
    note: str | None = None


@dataclass(frozen=True)
class InputFile:
    """A file of the project folder the inputs stage read, as the report's appendix lists it."""

    path: str  # project-relative, "/" separators
    size_bytes: int
    sha256: str  # hex digest of the bytes read
    results: int = 0  # result rows read from it
    links: int = 0  # links read from it


@dataclass(frozen=True)
class ImportSource:
    """One file read through an ``imports:`` entry of project.yaml (what ``reportgen import`` shows)."""

    entry: int  # 1-based position in imports:
    profile: str  # project-relative path of the profile
    kind: str  # "results" or "links"
    file: str  # project-relative path of the file read
    sheet: str | None  # the sheet read, for a spreadsheet
    rows_read: int  # data rows of the file (blank rows not counted)
    rows_made: int  # rows they became (a wide layout makes several per row)
    mapping: tuple[tuple[str, str], ...]  # (our field, their header or "constant: value"), in field order
    unmapped: tuple[str, ...]  # headers of the file no mapping uses, in file order
    link_ids: tuple[str, ...] = ()  # links made (kind "links")


@dataclass(frozen=True)
class Project:
    """A validated project folder: everything one report needs."""

    root: Path
    info: ProjectInfo
    testing: Testing
    links: tuple[Link, ...]
    results: pd.DataFrame = field(compare=False, repr=False)
    limits: LimitSet
    components: Mapping[str, Component] = field(default_factory=dict)
    transceivers: Mapping[str, Transceiver] = field(default_factory=dict)
    instruments: tuple[Instrument, ...] = ()
    technicians: tuple[str, ...] = ()
    report: ReportOptions = field(default_factory=ReportOptions)
    result_files: tuple[str, ...] = ()  # results/*.csv read, in order (header-only files too)
    # Every file of the project folder the inputs stage read, as project-relative paths
    # with "/" separators, sorted: project.yaml, links.csv, results, a limit file, the logo.
    files_read: tuple[str, ...] = ()
    imports: tuple[ImportSource, ...] = ()  # every file read through imports:, in entry order
    input_files: tuple[InputFile, ...] = ()  # files_read with size, SHA-256 and rows, same order
    applications: ApplicationTable | None = field(default=None, compare=False, repr=False)
    references: tuple[Reference, ...] | None = None  # None: the project has no references/ folder
    inspections: tuple[Inspection, ...] | None = None  # None: no inspections/ folder
    otdr: tuple[OtdrTrace, ...] = field(default=(), compare=False, repr=False)  # otdr/ traces

    def link(self, link_id: str) -> Link:
        for link in self.links:
            if link.link_id == link_id:
                return link
        raise KeyError(link_id)


@dataclass(frozen=True)
class LimitSet:
    """Allowances of one standard and edition, each value with its source."""

    id: str
    title: str
    source: str
    connection_db: float
    splice_db: float
    attenuation_db_per_km: Mapping[FiberType, Mapping[int, float]]
    attenuation_db_per_km_outside: Mapping[FiberType, Mapping[int, float]] = field(
        default_factory=dict
    )
    sources: Mapping[str, str] = field(default_factory=dict)  # key path -> citation
    notes: tuple[str, ...] = ()
    origin: str = "built-in"  # "built-in" or the project-relative path of the file

    def covers(self, fiber_type: FiberType) -> bool:
        return fiber_type in self.attenuation_db_per_km

    def table_for(self, fiber_type: FiberType, plant: Plant) -> Mapping[int, float]:
        """Attenuation by wavelength [dB/km]: the outside-plant table for an outside link
        when it lists the fiber type, else the first table (project format v1)."""
        if plant is Plant.OUTSIDE and fiber_type in self.attenuation_db_per_km_outside:
            return self.attenuation_db_per_km_outside[fiber_type]
        return self.attenuation_db_per_km.get(fiber_type, {})

    def wavelengths_nm(self, fiber_type: FiberType, plant: Plant = Plant.INSIDE) -> tuple[int, ...]:
        """Wavelengths [nm] the set defines for a fiber type and cable construction."""
        return tuple(sorted(self.table_for(fiber_type, plant)))

    def attenuation_for(self, fiber_type: FiberType, wavelength_nm: int, plant: Plant) -> float:
        """Attenuation coefficient α [dB/km]; raises KeyError when the set has none."""
        return self.table_for(fiber_type, plant)[wavelength_nm]

    def source_for(self, key: str) -> str:
        """Citation for a value's key path (e.g. ``attenuation_db_per_km.OS2``), else the set's."""
        while key:
            if key in self.sources:
                return self.sources[key]
            key = key.rpartition(".")[0]
        return self.source


# ------------------------------------------------------------ the application table


class ApplicationVerdict(StrEnum):
    SUPPORTED = "supported"
    NOT_SUPPORTED = "not-supported"
    UNTESTED = "untested"


class ReasonKind(StrEnum):
    FIBER_TYPE = "fiber-type-not-specified"
    TOO_LONG = "too-long"
    TOO_MUCH_LOSS = "too-much-loss"
    TOO_LITTLE_LOSS = "too-little-loss"
    UNTESTED = "untested"


@dataclass(frozen=True)
class FiberLimits:
    """One row of an application entry: the limits on some fiber types."""

    fiber_types: tuple[FiberType, ...]
    max_length_m: float | None  # None: the standard sets no reach (not checked)
    max_loss_db: float
    min_loss_db: float | None
    status: str  # "verified, secondary" / "derived" / "from memory", per value where mixed


@dataclass(frozen=True)
class Application:
    """One application: where it runs and what it needs from a link."""

    id: str
    family: str
    source: str
    operating_nm: tuple[int, ...]
    test_wavelengths_nm: tuple[int, ...]
    strands: int
    fibers: tuple[FiberLimits, ...]

    def limits_for(self, fiber_type: FiberType) -> FiberLimits | None:
        for row in self.fibers:
            if fiber_type in row.fiber_types:
                return row
        return None


@dataclass(frozen=True)
class ApplicationTable:
    title: str
    sources: Mapping[str, str]
    entries: tuple[Application, ...]

    @property
    def ids(self) -> tuple[str, ...]:
        return tuple(entry.id for entry in self.entries)

    def get(self, application_id: str) -> Application:
        for entry in self.entries:
            if entry.id == application_id:
                return entry
        raise KeyError(application_id)

    def __contains__(self, application_id: object) -> bool:
        return application_id in self.ids


# ------------------------------------------------------------ OTDR (tier 2)


class OtdrEventKind(StrEnum):
    LAUNCH = "launch"
    CONNECTOR = "connector"
    SPLICE = "splice"
    BEND = "bend"
    REFLECTIVE = "reflective"
    END = "end"
    OTHER = "other"


class Polish(StrEnum):
    """Connector end-face polish, which sets the reflectance expected of a connection."""

    UPC = "upc"
    APC = "apc"


@dataclass(frozen=True)
class OtdrSettings:
    """``testing.otdr`` of project.yaml; None means "use the default" (docs §12)."""

    launch_cord_m: float = 0.0
    receive_cord_m: float = 0.0
    connection_db: float | None = None  # tighter than the limit set's connection allowance
    splice_db: float | None = None
    polish: Polish = Polish.UPC
    reflectance_db: float | None = None  # limit for the polish; default by polish and fiber
    pair_tolerance_m: float | None = None  # fixed pairing tolerance instead of the formula
    lsa_threshold_db: float = 0.10
    length_tolerance_pct: float = 3.0


@dataclass(frozen=True)
class OtdrEvent:
    """One event of one trace, position from where that trace starts (cords included) [m]."""

    position_m: float
    kind: OtdrEventKind
    loss_db: float
    reflectance_db: float | None = None


@dataclass(frozen=True)
class OtdrTrace:
    """One OTDR measurement: a .sor file, or the rows of an event table of one key."""

    source_file: str
    source_line: int | None  # first row of an event table; None for a trace file
    link_id: str
    strand: int
    wavelength_nm: int
    direction: Direction
    events: tuple[OtdrEvent, ...]
    pulse_ns: float | None = None
    group_index: float | None = None
    sample_spacing_m: float | None = None  # distance between two trace points
    samples_db: Any = field(default=None, compare=False, repr=False)  # numpy array [dB] or None
    total_loss_db: float | None = None
    tested_at: str = ""
    instrument: str = ""
    technician: str = ""
    launch_cord_m: float | None = None  # per-trace override of testing.otdr
    receive_cord_m: float | None = None
