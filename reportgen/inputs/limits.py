"""Limit sets: built-in YAML files shipped in the package, or a project's own file.

A limit set holds the allowances of one standard and edition (attenuation per
fiber type and wavelength, connection and splice allowances), each value with
its source. See ``reportgen/data/limits/*.yaml`` and docs/project-format.md.
Both kinds are read like project.yaml (``reportgen.inputs.files.parse_yaml``: a key
given twice is refused with its line) and checked by one collecting
:class:`reportgen.inputs.checker.Checker`: every bad value is one problem.
"""
from __future__ import annotations

from collections.abc import Mapping
from importlib import resources
import re
from pathlib import Path
from typing import Any, Final

from reportgen.errors import InputError, InputProblem
from reportgen.inputs.checker import Checker, enum_choices, match_enum
from reportgen.inputs.files import parse_yaml, read_yaml
from reportgen.model import FiberType, LimitSet

_MAX_DB: Final = 100.0  # sanity bound for any allowance [dB] or coefficient [dB/km]
_ALLOWANCE: Final = f"of dB from 0 to {_MAX_DB:g}"
_TABLES: Final = ("attenuation_db_per_km", "attenuation_db_per_km_outside")
_KEYS: Final = {"": ("id", "title", "source", "connection_db", "splice_db", *_TABLES, "sources", "notes")}
_REQUIRED: Final = frozenset({("", "id"), ("", "title"), ("", "source"), ("", "connection_db"),
                              ("", "splice_db"), ("", "attenuation_db_per_km")})


def _builtin_dir():
    return resources.files("reportgen") / "data" / "limits"


def builtin_ids() -> list[str]:
    """Ids of the limit sets shipped with reportgen, sorted."""
    return sorted(
        entry.name.removesuffix(".yaml")
        for entry in _builtin_dir().iterdir()
        if entry.name.endswith(".yaml")
    )


def builtin_id(written: str) -> str | None:
    """The built-in limit set id ``written`` names, ignoring case and surrounding blanks
    (``TIA-568.3-D`` is ``tia-568.3-d``: standards are named in either case); else None."""
    by_lower = {set_id.lower(): set_id for set_id in builtin_ids()}
    return by_lower.get(written.strip().lower())


def load_builtin_limit_set(set_id: str) -> LimitSet:
    """A built-in limit set by id (any case); raises KeyError for an unknown id."""
    found = builtin_id(set_id)
    if found is None:
        raise KeyError(set_id)
    shown = f"built-in limit set {found}"
    data, problems = parse_yaml((_builtin_dir() / f"{found}.yaml").read_text(encoding="utf-8"), shown)
    return _checked(data, problems, shown, "built-in")


def load_limit_file(path: Path, shown_as: str) -> LimitSet:
    """A project's own limit set file; problems name the file as ``shown_as``.

    Read as project.yaml is (size guard, UTF-8, YAML with duplicate keys refused);
    raises InputError holding every problem of the file.
    """
    data, problems = read_yaml(path, shown_as)
    return _checked(data, problems, shown_as, shown_as)


def _checked(data: Any, problems: list[InputProblem], shown_as: str, origin: str) -> LimitSet:
    if data is None and problems:  # unreadable, or not YAML at all
        raise InputError(problems)
    limits, value_problems = check_limit_set(data, shown_as, origin)
    if problems or limits is None:
        raise InputError(problems + value_problems)
    return limits


def parse_limit_set(data: Any, shown_as: str, origin: str) -> LimitSet:
    """Check a limit set's YAML data; raises one InputError holding every problem."""
    limits, problems = check_limit_set(data, shown_as, origin)
    if limits is None:
        raise InputError(problems)
    return limits


def check_limit_set(data: Any, shown_as: str, origin: str) -> tuple[LimitSet | None, list[InputProblem]]:
    """Check a limit set's YAML data: the set, or None and every problem found."""
    check = Checker(None, shown_as, _KEYS, _REQUIRED)
    if not isinstance(data, Mapping):
        check.problem(None, "a YAML mapping with id, title, source, connection_db, splice_db, "
                            "attenuation_db_per_km",
                      "an empty file" if data is None else type(data).__name__)
        return None, check.problems
    check.misspelt_keys(data, "")
    texts = {key: check.text(data, key, key, required=True) for key in ("id", "title", "source")}
    allowances = {key: _allowance(check, data, key) for key in ("connection_db", "splice_db")}
    tables = {key: _table(check, data.get(key), key, required=key == _TABLES[0]) for key in _TABLES}
    sources = data.get("sources") or {}
    if not isinstance(sources, Mapping) or not all(isinstance(v, str) for v in sources.values()):
        check.problem("sources", "a mapping of key path to citation text", sources)
        sources = {}
    notes = data.get("notes") or []
    if not isinstance(notes, list) or not all(isinstance(n, str) for n in notes):
        check.problem("notes", "a list of texts", notes)
        notes = []
    if check.problems:
        return None, check.problems
    return LimitSet(
        id=texts["id"],
        title=texts["title"],
        source=texts["source"],
        connection_db=allowances["connection_db"],
        splice_db=allowances["splice_db"],
        attenuation_db_per_km=tables["attenuation_db_per_km"],
        attenuation_db_per_km_outside=tables["attenuation_db_per_km_outside"],
        sources={str(k): v for k, v in sources.items()},
        notes=tuple(notes),
        origin=origin,
    ), []


def _allowance(check: Checker, data: Mapping[str, Any], key: str) -> float | None:
    value = check.get(data, key, key, f"a number {_ALLOWANCE}", required=True)
    return None if value is None else check.number(value, key, _ALLOWANCE, 0.0, _MAX_DB)


def _table(check: Checker, value: Any, key: str, *, required: bool) -> dict[FiberType, dict[int, float]]:
    if value is None and not required:
        return {}
    if not isinstance(value, Mapping) or not value:
        check.problem(key, "a mapping of fiber type to {wavelength_nm: dB/km}",
                      *(() if value is None else (value,)))
        return {}
    table: dict[FiberType, dict[int, float]] = {}
    for fiber_name, row in value.items():
        path = f"{key}.{fiber_name}"
        fiber = match_enum(FiberType, str(fiber_name))
        if fiber is None:
            check.problem(path, f"a fiber type, one of {enum_choices(FiberType)}", fiber_name)
            continue
        if not isinstance(row, Mapping) or not row:
            check.problem(path, "a mapping of wavelength [nm] to dB/km", row)
            continue
        table[fiber] = {}
        for wavelength, alpha in row.items():
            wavelength_nm = check.wavelength(wavelength, path)
            coefficient = check.number(alpha, f"{path}.{wavelength}", _ALLOWANCE, 0.0, _MAX_DB)
            if wavelength_nm is not None and coefficient is not None:
                table[fiber][wavelength_nm] = coefficient
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


# A citation in the built-in data ends with its status in parentheses, in the words of
# DEVELOPERS.md ("verified, secondary", "derived", "from memory"), sometimes per wavelength:
# "ISO/IEC 11801-1:2017, cabled fibre attenuation, OM3/OM4 (850 nm verified, secondary;
# 1300 nm from memory)". A project's own limit file may give none.
STATUS_WORDS: Final[tuple[str, ...]] = ("verified", "derived", "from memory")
_STATUS_AT_END = re.compile(r"^(?P<citation>.*?)\s*\((?P<status>[^()]*)\)\s*$", re.S)
_WAVELENGTHS = re.compile(r"^\s*(?P<nm>[0-9]+(?:\s*(?:,|and)\s*[0-9]+)*)\s*nm\s+(?P<rest>.*)$", re.S)


def split_citation(text: str) -> tuple[str, str]:
    """``(citation, status)`` of a source text; status "" when the text states none."""
    found = _STATUS_AT_END.match(text)
    if found and any(word in found["status"] for word in STATUS_WORDS):
        return found["citation"].rstrip(" ,;"), found["status"].strip()
    return text.strip(), ""


def status_at(status: str, wavelength_nm: int | None = None) -> str:
    """The part of ``status`` that applies at ``wavelength_nm`` ("850 nm verified, ...;
    1300 nm from memory" at 1300 gives "from memory"); the whole status otherwise."""
    if wavelength_nm is None or ";" not in status:
        return status
    for part in status.split(";"):
        found = _WAVELENGTHS.match(part)
        if found and str(wavelength_nm) in re.split(r"\s*(?:,|and)\s*", found["nm"].strip()):
            return found["rest"].strip()
    return status


def is_unconfirmed(status: str) -> bool:
    """True when a status says a value was recalled, not checked against a source."""
    return "from memory" in status
