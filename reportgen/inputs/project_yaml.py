"""Checking project.yaml (project format v1) into model objects, collecting every problem.

Problems name the key path (``testing.reference_method``) and carry no line number.
Keys the contract does not know are ignored (it may grow), except one that looks
like a misspelling of a known key of the same mapping, which is reported.
"""
from __future__ import annotations

import difflib
import math
import os
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Final

from reportgen.inputs import audit, catalogs
from reportgen.inputs.checker import Checker as _BaseChecker, enum_choices, match_enum
from reportgen.inputs import limits as limit_sets
from reportgen.errors import InputError, InputProblem
from reportgen.inputs.otdr import OTDR_KEYS, otdr_settings
from reportgen.inputs.files import is_inside, resolve_inside, shown_path, size_in_mb
from reportgen.model import (
    DEFAULT_ATTENUATORS_DB,
    DEFAULT_WAVELENGTHS_NM,
    Component,
    Contractor,
    Directions,
    FiberCategory,
    Instrument,
    LengthUnit,
    LimitSet,
    Logo,
    Paper,
    ReportLanguage,
    ProjectInfo,
    ReferenceMethod,
    ReportOptions,
    Testing,
    Transceiver,
)

FILE: Final = "project.yaml"
MAX_LOGO_BYTES: Final = 2 * 2**20
LOGO_KINDS: Final = {".svg": "image/svg+xml", ".png": "image/png", ".jpg": "image/jpeg",
                     ".jpeg": "image/jpeg"}  # accepted file endings and their media types

KEYS: Final[Mapping[str, tuple[str, ...]]] = {
    "project": ("title", "site", "customer", "job_number", "contractor", "work_started"),
    "project.contractor": ("name", "address", "phone", "email", "logo"),
    "testing": ("limits", "reference_method", "directions", "uncertainty_db", "units",
                "wavelengths", "attenuators_db", "otdr", "audit", "period",
                "required_reference_method"),
    "testing.otdr": OTDR_KEYS,
    "testing.audit": tuple(audit.AUDIT_KEYS),
    "testing.period": ("start", "end"),
    "report": ("paper", "templates", "language", "embed_otdr_file_mb", "embed_otdr_total_mb",
               "tagged"),
}
REQUIRED_KEYS: Final = frozenset({("project", "title"), ("project", "contractor"),
                                  ("project.contractor", "name"), ("testing", "limits"),
                                  ("testing", "reference_method")})


def Checker(root: Path) -> _BaseChecker:
    """A checker for project.yaml: its known keys and required keys."""
    return _BaseChecker(root, FILE, KEYS, REQUIRED_KEYS)


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
    started_ok, started = audit.work_started(check, project.get("work_started"))
    if title is None or name is None or (contractor.get("logo") is not None and logo is None) \
            or not started_ok:
        return None
    return ProjectInfo(title=title, contractor=Contractor(name=name, logo=logo, **details),
                       work_started=started, **texts)


def _logo(check: Checker, value: Any) -> Logo | None:
    """The logo file, checked and read whole (the report embeds it; it reads no file)."""
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
    data = resolved.read_bytes()
    head = data[:4096]
    suffix = resolved.suffix.lower()
    looks_right = (head.startswith(b"\x89PNG\r\n\x1a\n") if suffix == ".png"
                   else head.startswith(b"\xff\xd8\xff") if suffix in (".jpg", ".jpeg")
                   else b"<svg" in head)
    if not looks_right:
        check.problem(path, f"a file whose content is a {suffix[1:].upper()} image", value)
        return None
    return Logo(path=resolved, mime=LOGO_KINDS[suffix], data=data)


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
    otdr = otdr_settings(check, testing)
    audit_settings = audit.audit_settings(check, testing.get("audit"))
    period_ok, period_start, period_end = audit.period(check, testing.get("period"))
    required_method = None
    if testing.get("required_reference_method") is not None:
        required_method = check.choice(testing, "required_reference_method",
                                       "testing.required_reference_method", ReferenceMethod, None)
        period_ok &= required_method is not None
    if None in (limits_id, method, directions, units, uncertainty_db, attenuators_db,
                audit_settings) or not period_ok:
        return None, limit_set, override, units
    wavelengths_nm = dict(DEFAULT_WAVELENGTHS_NM)
    wavelengths_nm.update(override or {})
    result = Testing(limits=limits_id, reference_method=method, directions=directions,
                     uncertainty_db=uncertainty_db, units=units, wavelengths_nm=wavelengths_nm,
                     attenuators_db=attenuators_db, otdr=otdr, audit=audit_settings,
                     required_reference_method=required_method, period_start=period_start,
                     period_end=period_end)
    return result, limit_set, override, units


def _limit_set(check: Checker, written: str) -> tuple[LimitSet | None, str | None]:
    ids = limit_sets.builtin_ids()
    set_id = limit_sets.builtin_id(written)
    if set_id is not None:
        return limit_sets.load_builtin_limit_set(set_id), set_id
    expected = (f"a built-in limit set ({', '.join(ids)}) or a path to a limits YAML file "
                "inside the project folder")
    resolved = resolve_inside(check.root, written)
    if resolved is None:
        check.problem("testing.limits", expected + " (symbolic links are followed)", written)
        return None, None
    try:
        is_file = resolved.is_file()
    except OSError:  # a name the file system refuses, e.g. longer than its limit
        is_file = False
    if not is_file:
        close = difflib.get_close_matches(written.lower(), ids, n=1, cutoff=0.6)
        hint = f" (did you mean {close[0]}?)" if close else ""
        check.problem("testing.limits", expected + hint, written)
        return None, None
    try:
        return limit_sets.load_limit_file(resolved, shown_path(check.root, resolved)), written
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
        check.problem("report", "a mapping with paper, templates, language, embed_otdr_file_mb, embed_otdr_total_mb, tagged", value)
        return None
    check.misspelt_keys(value, "report")
    paper = check.choice(value, "paper", "report.paper", Paper, Paper.A4)
    language = check.choice(value, "language", "report.language", ReportLanguage, ReportLanguage.EN)
    caps = {}
    for key, field in (("embed_otdr_file_mb", "otdr_file_mb"), ("embed_otdr_total_mb", "otdr_total_mb")):
        if value.get(key) is not None:
            caps[field] = check.number(value[key], f"report.{key}", "of megabytes, 0 or more",
                                       0.0, 1e6)
    tagged = value.get("tagged", False)
    if not isinstance(tagged, bool):
        check.problem("report.tagged", "true or false", tagged)
        tagged = None
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
    if paper is None or language is None or None in caps.values() or tagged is None:
        return None
    return ReportOptions(paper=paper, templates=templates, language=language, tagged=tagged, **caps)
