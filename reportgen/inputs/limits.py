"""Limit sets: built-in YAML files shipped in the package, or a project's own file.

A limit set holds the allowances of one standard and edition (attenuation per
fiber type and wavelength, connection and splice allowances), each value with
its source. See ``reportgen/data/limits/*.yaml`` and docs/project-format.md.
"""
from __future__ import annotations

from collections.abc import Mapping
from importlib import resources
from pathlib import Path
from typing import Any

import yaml

from reportgen.errors import InputError, InputProblem
from reportgen.model import FiberType, LimitSet

_MAX_DB = 100.0  # sanity bound for any allowance [dB] or coefficient [dB/km]


def _builtin_dir():
    return resources.files("reportgen") / "data" / "limits"


def builtin_ids() -> list[str]:
    """Ids of the limit sets shipped with reportgen, sorted."""
    return sorted(
        entry.name.removesuffix(".yaml")
        for entry in _builtin_dir().iterdir()
        if entry.name.endswith(".yaml")
    )


def load_builtin_limit_set(set_id: str) -> LimitSet:
    """A built-in limit set by id; raises KeyError for an unknown id."""
    if set_id not in builtin_ids():
        raise KeyError(set_id)
    text = (_builtin_dir() / f"{set_id}.yaml").read_text(encoding="utf-8")
    return parse_limit_set(yaml.safe_load(text), f"built-in limit set {set_id}", "built-in")


def load_limit_file(path: Path, shown_as: str) -> LimitSet:
    """A project's own limit set file; problems name the file as ``shown_as``."""
    try:
        text = path.read_text(encoding="utf-8-sig")
    except (OSError, UnicodeDecodeError) as error:
        raise InputError([InputProblem(shown_as, None, None, "a readable UTF-8 YAML limit set",
                                       type(error).__name__)]) from error
    try:
        data = yaml.safe_load(text)
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None)
        line = mark.line + 1 if mark is not None else None
        column = f"column {mark.column + 1}" if mark is not None else None
        raise InputError([InputProblem(shown_as, line, column, "valid YAML",
                                       str(getattr(error, "problem", error)))]) from error
    return parse_limit_set(data, shown_as, shown_as)


def parse_limit_set(data: Any, shown_as: str, origin: str) -> LimitSet:
    """Check a limit set's YAML data; collects every problem into one InputError."""
    problems: list[InputProblem] = []

    def problem(field: str | None, expected: str, found: Any = None) -> None:
        problems.append(InputProblem(shown_as, None, field, expected,
                                     None if found is None else str(found)))

    if not isinstance(data, Mapping):
        raise InputError([InputProblem(shown_as, None, None, "a YAML mapping with id, title, "
                                       "source, connection_db, splice_db, attenuation_db_per_km",
                                       type(data).__name__)])
    for key in ("id", "title", "source"):
        if not isinstance(data.get(key), str) or not data.get(key).strip():
            problem(key, "a non-empty text", data.get(key))
    allowances = {key: _number(data.get(key), f"{key}", problem) for key in ("connection_db", "splice_db")}
    tables = {}
    for key in ("attenuation_db_per_km", "attenuation_db_per_km_outside"):
        tables[key] = _table(data.get(key), key, problem, required=key == "attenuation_db_per_km")
    sources = data.get("sources") or {}
    if not isinstance(sources, Mapping) or not all(isinstance(v, str) for v in sources.values()):
        problem("sources", "a mapping of key path to citation text", sources)
        sources = {}
    notes = data.get("notes") or []
    if not isinstance(notes, list) or not all(isinstance(n, str) for n in notes):
        problem("notes", "a list of texts", notes)
        notes = []
    if problems:
        raise InputError(problems)
    return LimitSet(
        id=data["id"].strip(),
        title=data["title"].strip(),
        source=data["source"].strip(),
        connection_db=allowances["connection_db"],
        splice_db=allowances["splice_db"],
        attenuation_db_per_km=tables["attenuation_db_per_km"],
        attenuation_db_per_km_outside=tables["attenuation_db_per_km_outside"],
        sources={str(k): v for k, v in sources.items()},
        notes=tuple(notes),
        origin=origin,
    )


def _number(value: Any, field: str, problem) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not 0 <= value <= _MAX_DB:
        problem(field, f"a number of dB from 0 to {_MAX_DB:g}", value)
        return 0.0
    return float(value)


def _table(value: Any, key: str, problem, *, required: bool) -> dict[FiberType, dict[int, float]]:
    if value is None and not required:
        return {}
    if not isinstance(value, Mapping) or not value:
        problem(key, "a mapping of fiber type to {wavelength_nm: dB/km}", value)
        return {}
    by_name = {member.value.lower(): member for member in FiberType}
    table: dict[FiberType, dict[int, float]] = {}
    for fiber_name, row in value.items():
        fiber = by_name.get(str(fiber_name).strip().lower())
        if fiber is None:
            problem(f"{key}.{fiber_name}",
                    f"a fiber type, one of {', '.join(m.value for m in FiberType)}", fiber_name)
            continue
        if not isinstance(row, Mapping) or not row:
            problem(f"{key}.{fiber_name}", "a mapping of wavelength [nm] to dB/km", row)
            continue
        table[fiber] = {}
        for wavelength, alpha in row.items():
            if isinstance(wavelength, bool) or not isinstance(wavelength, int) or not 600 <= wavelength <= 1700:
                problem(f"{key}.{fiber_name}", "wavelengths as whole numbers of nm from 600 to 1700",
                        wavelength)
                continue
            table[fiber][wavelength] = _number(alpha, f"{key}.{fiber_name}.{wavelength}", problem)
    return table


def describe_rows(limits: LimitSet) -> list[dict[str, Any]]:
    """Flat rows (table, fiber, wavelength, value, source) for listing a set."""
    rows = []
    for table_key, table in (("inside", limits.attenuation_db_per_km),
                             ("outside", limits.attenuation_db_per_km_outside)):
        key_root = "attenuation_db_per_km" if table_key == "inside" else "attenuation_db_per_km_outside"
        for fiber, row in table.items():
            for wavelength_nm, alpha in sorted(row.items()):
                rows.append({
                    "table": table_key if limits.attenuation_db_per_km_outside else "all",
                    "fiber_type": fiber.value,
                    "wavelength_nm": wavelength_nm,
                    "attenuation_db_per_km": alpha,
                    "source": limits.source_for(f"{key_root}.{fiber.value}"),
                })
    return rows
