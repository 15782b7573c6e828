"""Checking project.yaml (project format v1) into model objects, collecting every problem.

Problems name the key path (``testing.reference_method``) and carry no line number.
Keys the contract does not know are ignored (it may grow), except one that looks
like a misspelling of a known key of the same mapping, which is reported.
"""
from __future__ import annotations

import difflib
import functools
import math
import os
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from enum import StrEnum
from pathlib import Path
from typing import Any, Final, TypeVar

from . import catalogs
from . import limits as limit_sets
from .errors import InputError, InputProblem
from .load import MAX_FILE_BYTES, as_written, clip, is_inside, resolve_inside, shown_path, shown_value, size_in_mb
from .model import (
    DEFAULT_ATTENUATORS_DB,
    DEFAULT_WAVELENGTHS_NM,
    Component,
    Contractor,
    Directions,
    FiberCategory,
    Instrument,
    LengthUnit,
    LimitSet,
    Paper,
    ProjectInfo,
    ReferenceMethod,
    ReportOptions,
    Testing,
    Transceiver,
)

FILE: Final = "project.yaml"
MAX_LOGO_BYTES: Final = 2 * 2**20
LOGO_KINDS: Final = (".svg", ".png", ".jpg", ".jpeg")
WAVELENGTH_RANGE_NM: Final = (600, 1700)
_NUMBER_TEXT = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?", re.ASCII)
_MISSING = object()
E = TypeVar("E", bound=StrEnum)

_KEYS: Final[Mapping[str, tuple[str, ...]]] = {
    "project": ("title", "site", "customer", "job_number", "contractor"),
    "project.contractor": ("name", "address", "phone", "email", "logo"),
    "testing": ("limits", "reference_method", "directions", "uncertainty_db", "units",
                "wavelengths", "attenuators_db"),
    "report": ("paper", "templates"),
}


@dataclass
class Settings:
    """What project.yaml gave; a part is None when it could not be used."""

    info: ProjectInfo | None = None
    testing: Testing | None = None
    limits: LimitSet | None = None
    wavelength_override: dict[FiberCategory, tuple[int, ...]] = field(default_factory=dict)
    components: dict[str, Component] | None = None
    transceivers: dict[str, Transceiver] | None = None
    instruments: tuple[Instrument, ...] | None = None
    technicians: tuple[str, ...] = ()
    report: ReportOptions | None = None
    units: LengthUnit | None = None


def enum_choices(enum: type[StrEnum]) -> str:
    return ", ".join(member.value for member in enum)


@functools.cache
def _members_by_text(enum: type[StrEnum]) -> dict[str, StrEnum]:
    return {member.value.lower(): member for member in enum}


def match_enum(enum: type[E], text: str) -> E | None:
    """The member whose value equals ``text`` ignoring case and surrounding blanks."""
    return _members_by_text(enum).get(text.strip().lower())


def _shown(value: Any) -> str:
    """A value quoted back in a problem: numbers as written, structures never expanded in full."""
    written = getattr(value, "yaml_text", None)
    return clip(written) if written else shown_value(value)


class Checker:
    """Collects problems of project.yaml while reading its values."""

    def __init__(self, root: Path) -> None:
        self.root = root
        self.problems: list[InputProblem] = []

    def problem(self, path: str, expected: str, found: Any = _MISSING) -> None:
        self.problems.append(InputProblem(FILE, None, path, expected,
                                          None if found is _MISSING else _shown(found)))

    def section(self, data: Mapping[str, Any], key: str, path: str, expected: str,
                *, required: bool) -> Mapping[str, Any] | None:
        value = self.get(data, key, path, expected, required=required)
        if value is None:
            return None
        if not isinstance(value, Mapping):
            self.problem(path, expected, value)
            return None
        self.misspelt_keys(value, path)
        return value

    def get(self, data: Mapping[str, Any], key: str, path: str, expected: str,
            *, required: bool) -> Any:
        """The value of ``key``; a required key that is missing or empty is a problem."""
        if key in data and data[key] is not None:
            return data[key]
        if required:
            if key in data:
                self.problem(path, f"{expected} (the key has no value)")
            else:
                hint = ""
                others = [str(k) for k in data if k not in _KEYS.get(path.rpartition(".")[0], ())]
                close = difflib.get_close_matches(key, others, n=1, cutoff=0.8)
                if close:
                    hint = f"; did you mean {key} instead of {close[0]!r}?"
                self.problem(path, f"{expected} (required key is missing{hint})")
        return None

    def misspelt_keys(self, data: Mapping[str, Any], path: str) -> None:
        """Report keys that look like misspellings of known optional keys not given."""
        known = _KEYS.get(path)
        if not known:
            return
        for key in data:
            if key in known or not isinstance(key, str):
                continue
            close = difflib.get_close_matches(key.lower(), known, n=1, cutoff=0.8)
            if close and close[0] not in data and not self._required(path, close[0]):
                self.problem(f"{path}.{clip(key)}", f"a key the format knows (did you mean {close[0]}?)")

    @staticmethod
    def _required(path: str, key: str) -> bool:
        return (path, key) in {("project", "title"), ("project", "contractor"),
                               ("project.contractor", "name"), ("testing", "limits"),
                               ("testing", "reference_method")}

    def text(self, data: Mapping[str, Any], key: str, path: str, *, required: bool = False) -> str | None:
        value = self.get(data, key, path, "a non-empty text", required=required)
        if value is None:
            return None
        if isinstance(value, (Mapping, list, bool)) or not as_written(value).strip():
            self.problem(path, "a non-empty text", value)
            return None
        return as_written(value).strip()

    def choice(self, data: Mapping[str, Any], key: str, path: str, enum: type[E],
               default: E | None) -> E | None:
        value = self.get(data, key, path, f"one of {enum_choices(enum)}", required=default is None)
        if value is None:
            return default
        member = match_enum(enum, as_written(value)) if isinstance(value, (str, int, float)) else None
        if member is None:
            self.problem(path, f"one of {enum_choices(enum)}", value)
        return member

    def number(self, value: Any, path: str, expected: str, low: float, high: float,
               *, low_open: bool = False) -> float | None:
        written = value
        if isinstance(value, str) and _NUMBER_TEXT.fullmatch(value.strip()):
            value = float(value)
        if isinstance(value, int) and not isinstance(value, bool):
            try:
                value = float(value)
            except OverflowError:  # an integer of hundreds of digits
                value = math.inf
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            hint = " (write numbers with a decimal point, not a comma)" if isinstance(value, str) \
                and "," in value else ""
            self.problem(path, f"a number {expected}{hint}", written)
            return None
        if value < low or value > high or (low_open and value == low):
            self.problem(path, f"a number {expected}", written)
            return None
        return float(value)

    def wavelength(self, value: Any, path: str) -> int | None:
        low, high = WAVELENGTH_RANGE_NM
        if isinstance(value, bool) or not isinstance(value, int) or not low <= value <= high:
            self.problem(path, f"a wavelength in whole nm from {low} to {high}", value)
            return None
        return int(value)

    def inside_path(self, value: Any, path: str, what: str) -> Path | None:
        if not isinstance(value, str) or not value.strip():
            self.problem(path, f"a path to {what} inside the project folder", value)
            return None
        resolved = resolve_inside(self.root, value)
        if resolved is None:
            self.problem(path, f"a path to {what} inside the project folder "
                               "(symbolic links are followed)", value)
        return resolved


def check_project_yaml(data: Any, root: Path) -> tuple[Settings, list[InputProblem]]:
    """Check the parsed project.yaml of the folder ``root`` (resolved)."""
    check = Checker(root)
    settings = Settings()
    if not isinstance(data, Mapping):
        check.problem(None, "a YAML mapping with the sections project and testing",
                      "an empty file" if data is None else type(data).__name__)
        return settings, check.problems
    settings.info = _info(check, data)
    settings.testing, settings.limits, settings.wavelength_override, settings.units = _testing(check, data)
    settings.components = catalogs.components(check, data.get("components"))
    settings.transceivers = catalogs.transceivers(check, data.get("transceivers"))
    settings.instruments = catalogs.instruments(check, data.get("instruments"))
    settings.technicians = catalogs.technicians(check, data.get("technicians"))
    settings.report = _report(check, data.get("report"))
    return settings, check.problems


def _info(check: Checker, data: Mapping[str, Any]) -> ProjectInfo | None:
    project = check.section(data, "project", "project", "a mapping with title and contractor",
                            required=True)
    if project is None:
        return None
    title = check.text(project, "title", "project.title", required=True)
    texts = {key: check.text(project, key, f"project.{key}") for key in ("site", "customer", "job_number")}
    contractor = check.section(project, "contractor", "project.contractor", "a mapping with name",
                               required=True)
    if contractor is None:
        return None
    name = check.text(contractor, "name", "project.contractor.name", required=True)
    details = {key: check.text(contractor, key, f"project.contractor.{key}")
               for key in ("address", "phone", "email")}
    logo = _logo(check, contractor.get("logo"))
    if title is None or name is None or (contractor.get("logo") is not None and logo is None):
        return None
    return ProjectInfo(title=title, contractor=Contractor(name=name, logo=logo, **details), **texts)


def _logo(check: Checker, value: Any) -> Path | None:
    if value is None:
        return None
    path = "project.contractor.logo"
    resolved = check.inside_path(value, path, "an image")
    if resolved is None:
        return None
    if not resolved.is_file():
        check.problem(path, "an existing image file inside the project folder", value)
        return None
    if resolved.suffix.lower() not in LOGO_KINDS:
        check.problem(path, "an image file ending .svg, .png, .jpg or .jpeg", value)
        return None
    size = resolved.stat().st_size
    if size > MAX_LOGO_BYTES:
        check.problem(path, f"an image of at most {size_in_mb(MAX_LOGO_BYTES)} MB; "
                            f"this one is {size_in_mb(size)} MB", value)
        return None
    with resolved.open("rb") as handle:
        head = handle.read(4096)
    suffix = resolved.suffix.lower()
    looks_right = (head.startswith(b"\x89PNG\r\n\x1a\n") if suffix == ".png"
                   else head.startswith(b"\xff\xd8\xff") if suffix in (".jpg", ".jpeg")
                   else b"<svg" in head)
    if not looks_right:
        check.problem(path, f"a file whose content is a {suffix[1:].upper()} image", value)
        return None
    return resolved


def _testing(check: Checker, data: Mapping[str, Any]):
    testing = check.section(data, "testing", "testing", "a mapping with limits and reference_method",
                            required=True)
    if testing is None:
        return None, None, {}, None
    limits_text = check.text(testing, "limits", "testing.limits", required=True)
    limit_set, limits_id = _limit_set(check, limits_text) if limits_text else (None, None)
    method = check.choice(testing, "reference_method", "testing.reference_method", ReferenceMethod, None)
    directions = check.choice(testing, "directions", "testing.directions", Directions, Directions.BOTH)
    units = check.choice(testing, "units", "testing.units", LengthUnit, LengthUnit.M)
    uncertainty_db = 0.0
    if testing.get("uncertainty_db") is not None:
        uncertainty_db = check.number(testing["uncertainty_db"], "testing.uncertainty_db",
                                      "of 0 dB or more", 0.0, math.inf)
    override = _wavelengths(check, testing.get("wavelengths"))
    attenuators_db = _attenuators(check, testing.get("attenuators_db"))
    if None in (limits_id, method, directions, units, uncertainty_db, attenuators_db):
        return None, limit_set, override, units
    wavelengths_nm = dict(DEFAULT_WAVELENGTHS_NM)
    wavelengths_nm.update(override or {})
    result = Testing(limits=limits_id, reference_method=method, directions=directions,
                     uncertainty_db=uncertainty_db, units=units, wavelengths_nm=wavelengths_nm,
                     attenuators_db=attenuators_db)
    return result, limit_set, override, units


def _limit_set(check: Checker, written: str) -> tuple[LimitSet | None, str | None]:
    ids = limit_sets.builtin_ids()
    by_lower = {set_id.lower(): set_id for set_id in ids}
    if written.lower() in by_lower:
        set_id = by_lower[written.lower()]
        return limit_sets.load_builtin_limit_set(set_id), set_id
    expected = (f"a built-in limit set ({', '.join(ids)}) or a path to a limits YAML file "
                "inside the project folder")
    resolved = resolve_inside(check.root, written)
    if resolved is None:
        check.problem("testing.limits", expected + " (symbolic links are followed)", written)
        return None, None
    if not resolved.is_file():
        close = difflib.get_close_matches(written.lower(), list(by_lower), n=1, cutoff=0.6)
        hint = f" (did you mean {by_lower[close[0]]}?)" if close else ""
        check.problem("testing.limits", expected + hint, written)
        return None, None
    shown = shown_path(check.root, resolved)
    size = resolved.stat().st_size
    if size > MAX_FILE_BYTES:
        check.problems.append(InputProblem(
            shown, None, None, f"a file of at most {size_in_mb(MAX_FILE_BYTES)} MB; "
                               f"this file is {size_in_mb(size)} MB"))
        return None, None
    try:
        return limit_sets.load_limit_file(resolved, shown), written
    except InputError as error:
        check.problems.extend(error.problems)
        return None, None


def _wavelengths(check: Checker, value: Any) -> dict[FiberCategory, tuple[int, ...]]:
    if value is None:
        return {}
    expected = "a mapping of multimode and/or singlemode to a list of wavelengths [nm]"
    if not isinstance(value, Mapping):
        check.problem("testing.wavelengths", expected, value)
        return {}
    override: dict[FiberCategory, tuple[int, ...]] = {}
    for key, listed in value.items():
        path = f"testing.wavelengths.{key}"
        category = match_enum(FiberCategory, str(key))
        if category is None:
            check.problem(path, f"a fiber category, one of {enum_choices(FiberCategory)}", key)
            continue
        if not isinstance(listed, list) or not listed:
            check.problem(path, "a non-empty list of wavelengths [nm], e.g. [850, 1300]", listed)
            continue
        wavelengths = [check.wavelength(item, path) for item in listed]
        if None in wavelengths:
            continue
        if len(set(wavelengths)) != len(wavelengths):
            check.problem(path, "each wavelength once", listed)
            continue
        override[category] = tuple(wavelengths)
    return override


def _attenuators(check: Checker, value: Any) -> tuple[float, ...] | None:
    if value is None:
        return DEFAULT_ATTENUATORS_DB
    if not isinstance(value, list) or not value:
        check.problem("testing.attenuators_db", "a non-empty list of positive numbers [dB]", value)
        return None
    values = [check.number(item, "testing.attenuators_db", "greater than 0 dB", 0.0, math.inf,
                           low_open=True) for item in value]
    return None if None in values else tuple(values)


def _links_leading_outside(root: Path, folder: Path) -> str | None:
    """The first entry under ``folder`` (as a path relative to ``root``) whose real path lies
    outside ``root``, else None; symbolic links are not followed into other folders."""
    for current, folders, files in os.walk(folder, followlinks=False):
        for name in sorted(folders + files):
            path = Path(current) / name
            if path.is_symlink() and not is_inside(root, path):
                return shown_path(root, path)
    return None


def _report(check: Checker, value: Any) -> ReportOptions | None:
    if value is None:
        return ReportOptions()
    if not isinstance(value, Mapping):
        check.problem("report", "a mapping with paper and/or templates", value)
        return None
    check.misspelt_keys(value, "report")
    paper = check.choice(value, "paper", "report.paper", Paper, Paper.A4)
    templates = None
    if value.get("templates") is not None:
        templates = check.inside_path(value["templates"], "report.templates", "a templates folder")
        if templates is not None and not templates.is_dir():
            check.problem("report.templates", "an existing folder inside the project folder",
                          value["templates"])
            templates = None
        if templates is not None:
            leading_out = _links_leading_outside(check.root, templates)
            if leading_out:
                check.problem("report.templates", "template files inside the project folder; "
                              f"{leading_out} is a symbolic link leading outside it", value["templates"])
                templates = None
        if templates is None:
            return None
    return None if paper is None else ReportOptions(paper=paper, templates=templates)
