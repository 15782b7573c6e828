"""Reading values out of a parsed YAML file while collecting every problem.

One checker style for every YAML input (project.yaml, limit files, the application
table): each problem names the file and the key path and what was expected. The
number pattern and the wavelength range every input accepts are defined here once.
"""
from __future__ import annotations

import difflib
import functools
import math
import re
from collections.abc import Collection, Mapping
from enum import StrEnum
from pathlib import Path
from typing import Any, Final, TypeVar

from reportgen.errors import InputProblem
from reportgen.inputs.files import as_written, clip, resolve_inside, shown_value

# A decimal number as written in a text file: digits with a point, optional exponent.
NUMBER_TEXT: Final = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?", re.ASCII)
# A number written with a decimal comma (1,25): refused everywhere, with DECIMAL_HINT.
DECIMAL_COMMA_TEXT: Final = re.compile(r"[+-]?\d+,\d+", re.ASCII)
DECIMAL_HINT: Final = " (write numbers with a decimal point, not a comma)"
# Test wavelengths accepted anywhere [nm]: the fiber windows in use, 600 to 1700 nm.
WAVELENGTH_RANGE_NM: Final = (600, 1700)
_MISSING = object()
E = TypeVar("E", bound=StrEnum)


def enum_choices(enum: type[StrEnum]) -> str:
    return ", ".join(member.value for member in enum)


@functools.cache
def _members_by_text(enum: type[StrEnum]) -> dict[str, StrEnum]:
    return {member.value.lower(): member for member in enum}


def match_enum(enum: type[E], text: str) -> E | None:
    """The member whose value equals ``text`` ignoring case and surrounding blanks."""
    return _members_by_text(enum).get(text.strip().lower())


def by_lower_case(known: Collection[str]) -> dict[str, str]:
    """Known ids by their lower-case spelling (of ids differing only in case, the first sorted)."""
    by_lower: dict[str, str] = {}
    for name in sorted(known):
        by_lower.setdefault(name.lower(), name)
    return by_lower


def closest(text: str, by_lower: Mapping[str, str], cutoff: float = 0.8) -> str | None:
    """The known id ``text`` most likely meant: one differing only in case, else the closest by
    difflib (ignoring case, similarity at least ``cutoff``); None when nothing is close.
    ``by_lower`` is :func:`by_lower_case` of the known ids."""
    folded = text.strip().lower()
    if folded in by_lower:
        return by_lower[folded]
    close = difflib.get_close_matches(folded, list(by_lower), n=1, cutoff=cutoff)
    return by_lower[close[0]] if close else None


def _shown(value: Any) -> str:
    """A value quoted back in a problem: numbers as written, structures never expanded in full."""
    written = getattr(value, "yaml_text", None)
    return clip(written) if written else shown_value(value)


class Checker:
    """Collects the problems of one YAML file while reading its values."""

    def __init__(self, root: Path | None, file: str,
                 keys: Mapping[str, tuple[str, ...]] | None = None,
                 required_keys: frozenset[tuple[str, str]] = frozenset()) -> None:
        self.root = root
        self.file = file
        self.keys = keys or {}
        self.required_keys = required_keys
        self.problems: list[InputProblem] = []

    def problem(self, path: str, expected: str, found: Any = _MISSING) -> None:
        self.problems.append(InputProblem(self.file, None, path, expected,
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
                others = [str(k) for k in data if k not in self.keys.get(path.rpartition(".")[0], ())]
                close = difflib.get_close_matches(key, others, n=1, cutoff=0.8)
                if close:
                    hint = f"; did you mean {key} instead of {close[0]!r}?"
                self.problem(path, f"{expected} (required key is missing{hint})")
        return None

    def misspelt_keys(self, data: Mapping[str, Any], path: str) -> None:
        """Report keys that look like misspellings of known optional keys not given."""
        known = self.keys.get(path)
        if not known:
            return
        for key in data:
            if key in known or not isinstance(key, str):
                continue
            close = difflib.get_close_matches(key.lower(), known, n=1, cutoff=0.8)
            if close and close[0] not in data and not self._required(path, close[0]):
                self.problem(f"{path}.{clip(key)}" if path else clip(key),
                             f"a key the format knows (did you mean {close[0]}?)")

    def _required(self, path: str, key: str) -> bool:
        return (path, key) in self.required_keys

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
        if isinstance(value, str) and NUMBER_TEXT.fullmatch(value.strip()):
            value = float(value)
        if isinstance(value, int) and not isinstance(value, bool):
            try:
                value = float(value)
            except OverflowError:  # an integer of hundreds of digits
                value = math.inf
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            hint = DECIMAL_HINT if isinstance(value, str) and DECIMAL_COMMA_TEXT.fullmatch(value.strip()) \
                else ""
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
        if self.root is None or not isinstance(value, str) or not value.strip():
            self.problem(path, f"a path to {what} inside the project folder", value)
            return None
        resolved = resolve_inside(self.root, value)
        if resolved is None:
            self.problem(path, f"a path to {what} inside the project folder "
                               "(symbolic links are followed)", value)
        return resolved
