"""project.yaml settings of the audit: ``testing.audit``, ``testing.period``,
``testing.required_reference_method`` and ``project.work_started``.

Thresholds the file leaves out keep the defaults of :class:`reportgen.model.AuditSettings`
(their sources: docs/project-format.md, "Audit findings").
"""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from datetime import date
from typing import Any, Final

from reportgen.inputs.catalogs import check_date
from reportgen.inputs.checker import Checker
from reportgen.model import AuditSettings

# key -> (expected text, low, high, low_open, whole number)
AUDIT_KEYS: Final[Mapping[str, tuple[str, float, float, bool, bool]]] = {
    "asymmetry_db": ("greater than 0 dB", 0.0, 100.0, True, False),
    "rayleigh_db_um4_per_km": ("from 0 to 2", 0.0, 2.0, False, False),
    "low_loss_connection_db": ("from 0 to 1 dB", 0.0, 1.0, False, False),
    "repeat_count": ("from 3 to 1000, without decimals", 3, 1000, False, True),
    "min_length_inside_m": ("of 0 m or more", 0.0, math.inf, False, False),
    "min_length_outside_m": ("of 0 m or more", 0.0, math.inf, False, False),
    "length_tolerance_percent": ("of 0 % or more", 0.0, 1000.0, False, False),
    "length_tolerance_m": ("of 0 m or more", 0.0, math.inf, False, False),
    "reference_max_age_h": ("greater than 0 hours", 0.0, math.inf, True, False),
    "cord_check_max_db": ("greater than 0 dB", 0.0, 100.0, True, False),
}


def audit_settings(check: Checker, value: Any) -> AuditSettings | None:
    """``testing.audit``: every key optional; None when a value is wrong."""
    if value is None:
        return AuditSettings()
    if not isinstance(value, Mapping):
        check.problem("testing.audit", "a mapping of audit thresholds, e.g. asymmetry_db: 0.5", value)
        return None
    check.misspelt_keys(value, "testing.audit")
    given: dict[str, float | int] = {}
    complete = True
    for key, (expected, low, high, low_open, whole) in AUDIT_KEYS.items():
        if value.get(key) is None:
            continue
        number = check.number(value[key], f"testing.audit.{key}", expected, low, high,
                              low_open=low_open)
        if number is not None and whole and number != int(number):
            check.problem(f"testing.audit.{key}", f"a number {expected}", value[key])
            number = None
        if number is None:
            complete = False
            continue
        given[key] = int(number) if whole else number
    if not complete:
        return None
    return dataclasses.replace(AuditSettings(), **given)


def period(check: Checker, value: Any) -> tuple[bool, date | None, date | None]:
    """``testing.period``: ``{start: YYYY-MM-DD, end: YYYY-MM-DD}`` (either may be left out).

    Returns (valid, start, end).
    """
    if value is None:
        return True, None, None
    expected = "a mapping with start and/or end, each a date YYYY-MM-DD"
    if not isinstance(value, Mapping) or not ({"start", "end"} & set(value)):
        check.problem("testing.period", expected, value)
        return False, None, None
    check.misspelt_keys(value, "testing.period")
    days = {}
    valid = True
    for key in ("start", "end"):
        if value.get(key) is None:
            days[key] = None
            continue
        days[key] = check_date(check, value[key], f"testing.period.{key}")
        valid &= days[key] is not None
    if valid and days["start"] and days["end"] and days["end"] < days["start"]:
        check.problem("testing.period.end", f"a date on or after the start ({days['start']})",
                      days["end"].isoformat())
        valid = False
    return valid, days["start"], days["end"]


def work_started(check: Checker, value: Any) -> tuple[bool, date | None]:
    """``project.work_started``: the day installation began (optional)."""
    if value is None:
        return True, None
    day = check_date(check, value, "project.work_started")
    return day is not None, day
