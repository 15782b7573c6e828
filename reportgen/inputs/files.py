"""Reading the files of a project folder: size guard, text decoding, YAML, paths.

Only I/O lives here; what the contents must look like is checked in
``reportgen.inputs.project`` (CSV tables are read by ``reportgen.inputs.csvread``). Nothing
in this module writes to the project folder.
"""
from __future__ import annotations

import math
import os
import reprlib
from pathlib import Path
from typing import Any, Final

import yaml

from reportgen.errors import InputProblem

MAX_FILE_BYTES: Final = 256 * 2**20  # largest input file read (256 MB)
_BYTES_PER_MB: Final = 2**20


MAX_SHOWN_CHARS: Final = 80  # longest value quoted back in a problem
_SHOWN_REPR = reprlib.Repr()
_SHOWN_REPR.maxlevel = 3
_SHOWN_REPR.maxstring = MAX_SHOWN_CHARS
_SHOWN_REPR.maxother = MAX_SHOWN_CHARS


def clip(text: str, limit: int = MAX_SHOWN_CHARS) -> str:
    """``text`` cut to ``limit`` characters (ending in ``...``) so a message stays one short line."""
    return text if len(text) <= limit else text[:limit - 3] + "..."


def shown_value(value: object) -> str:
    """A short text for any value, also a huge or deeply nested YAML structure (never expanded)."""
    if isinstance(value, str):
        return clip(value)
    return clip(_SHOWN_REPR.repr(value))


def printable(text: str) -> str:
    """``text`` with characters a terminal would act on (escape sequences, bidirectional
    overrides, other non-printable characters) written as ``\\x1b``-style escapes."""
    if text.isprintable():
        return text
    return "".join(char if char.isprintable() else repr(char)[1:-1] for char in text)


def size_in_mb(size_bytes: int) -> int:
    """A file size in whole MB (1 MB = 2**20 bytes), rounded up so 256.1 MB reads 257."""
    return math.ceil(size_bytes / _BYTES_PER_MB)


def shown_path(root: Path, path: Path) -> str:
    """``path`` relative to the project folder, with forward slashes."""
    try:
        return path.relative_to(root).as_posix()
    except ValueError:
        return path.as_posix()


def resolve_inside(root: Path, written: str) -> Path | None:
    """The real path (symlinks resolved) of ``written`` if it lies inside ``root``, else None.

    ``root`` must already be resolved. Absolute paths are accepted when they point
    inside the folder.
    """
    candidate = Path(written.strip()).expanduser()
    resolved = (candidate if candidate.is_absolute() else root / candidate).resolve()
    if resolved == root or root in resolved.parents:
        return resolved
    return None


def is_inside(root: Path, path: Path) -> bool:
    """Whether the real path of ``path`` (every symbolic link resolved) lies inside ``root``.

    ``root`` must already be resolved.
    """
    real = Path(os.path.realpath(path))
    return real == root or root in real.parents


def outside_problem(shown: str) -> InputProblem:
    """The problem for an input file or folder whose real path is outside the project folder."""
    return InputProblem(shown, None, None,
                        "a file inside the project folder; this is a symbolic link leading outside "
                        "it and was not read")


def read_bytes(path: Path, shown: str, max_bytes: int = MAX_FILE_BYTES) -> tuple[bytes | None, list[InputProblem]]:
    """The content of a file, refusing one larger than ``max_bytes`` before reading it."""
    try:
        size = path.stat().st_size
    except OSError as error:
        return None, [InputProblem(shown, None, None, "a readable file", error.strerror or type(error).__name__)]
    if size > max_bytes:
        return None, [InputProblem(
            shown, None, None,
            f"a file of at most {size_in_mb(max_bytes)} MB; this file is {size_in_mb(size)} MB")]
    try:
        return path.read_bytes(), []
    except OSError as error:
        return None, [InputProblem(shown, None, None, "a readable file", error.strerror or type(error).__name__)]


def decode_text(data: bytes, shown: str) -> tuple[str | None, list[InputProblem]]:
    """UTF-8 text with or without a byte-order mark; a problem names the line of the first bad byte."""
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        return None, [InputProblem(shown, None, None,
                                   "UTF-8 text; this file is UTF-16 encoded (save it as UTF-8)")]
    try:
        return data.decode("utf-8-sig"), []
    except UnicodeDecodeError as error:
        line = data.count(b"\n", 0, error.start) + 1
        bad = data[error.start:error.start + 1].hex().upper()
        return None, [InputProblem(shown, line, None, "UTF-8 text (save the file as UTF-8)",
                                   f"byte 0x{bad}")]


def read_text(path: Path, shown: str) -> tuple[str | None, list[InputProblem]]:
    """A UTF-8 text file, size-guarded; (None, problems) when it cannot be used."""
    data, problems = read_bytes(path, shown)
    if data is None:
        return None, problems
    return decode_text(data, shown)


class _Int(int):
    """An int from YAML that remembers how it was written (``00417`` stays ``00417``)."""

    yaml_text: str


class _Float(float):
    """A float from YAML that remembers how it was written."""

    yaml_text: str


class _Loader(yaml.SafeLoader):
    """Safe YAML loader that notes duplicate keys and keeps the text of numbers."""

    def __init__(self, stream: str) -> None:
        super().__init__(stream)
        self.duplicates: list[tuple[int, str, int]] = []  # (line, key, first line)

    def construct_mapping(self, node: yaml.MappingNode, deep: bool = False) -> dict[Any, Any]:
        first_line: dict[Any, int] = {}
        for key_node, _ in node.value:
            if not isinstance(key_node, yaml.ScalarNode):
                continue
            key = key_node.value
            line = key_node.start_mark.line + 1
            if key in first_line and key != "<<":
                self.duplicates.append((line, key, first_line[key]))
            first_line.setdefault(key, line)
        return super().construct_mapping(node, deep=deep)


    def construct_object(self, node: yaml.Node, deep: bool = False) -> Any:
        """Any value error while building a value becomes a YAML error with line and column."""
        try:
            return super().construct_object(node, deep=deep)
        except (ValueError, OverflowError, TypeError) as error:
            raise yaml.constructor.ConstructorError(
                None, None, clip(str(error), 120), node.start_mark) from error


def _construct_int(loader: _Loader, node: yaml.ScalarNode) -> _Int:
    value = _Int(yaml.SafeLoader.construct_yaml_int(loader, node))
    value.yaml_text = node.value
    return value


def _construct_float(loader: _Loader, node: yaml.ScalarNode) -> _Float:
    value = _Float(yaml.SafeLoader.construct_yaml_float(loader, node))
    value.yaml_text = node.value
    return value


def _construct_timestamp(loader: _Loader, node: yaml.ScalarNode) -> Any:
    """A date or date-time; one that looks like a date but is none (2030-02-30) stays text."""
    try:
        return yaml.SafeLoader.construct_yaml_timestamp(loader, node)
    except (ValueError, OverflowError):
        return node.value


_Loader.add_constructor("tag:yaml.org,2002:int", _construct_int)
_Loader.add_constructor("tag:yaml.org,2002:timestamp", _construct_timestamp)
_Loader.add_constructor("tag:yaml.org,2002:float", _construct_float)


def as_written(value: Any) -> str:
    """A YAML scalar as text, numbers as they were written (``serial: 00417`` -> ``'00417'``)."""
    return getattr(value, "yaml_text", None) or str(value)


def parse_yaml(text: str, shown: str) -> tuple[Any, list[InputProblem]]:
    """YAML data from text; a syntax error gives one problem with line and column."""
    try:
        loader = _Loader(text)  # checks that every character is one YAML allows
    except yaml.reader.ReaderError as error:
        line = text.count("\n", 0, error.position) + 1
        column = error.position - (text.rfind("\n", 0, error.position) + 1) + 1
        return None, [InputProblem(shown, line, f"column {column}",
                                   "valid YAML: printable characters, tabs and line breaks only",
                                   f"character U+{error.character:04X}")]
    try:
        data = loader.get_single_data()
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None)
        line = mark.line + 1 if mark is not None else None
        column = f"column {mark.column + 1}" if mark is not None else None
        problem = getattr(error, "problem", None) or str(error)
        return None, [InputProblem(shown, line, column, "valid YAML", clip(problem, 120))]
    except (ValueError, OverflowError, TypeError) as error:  # not expected: the constructors convert these
        return None, [InputProblem(shown, None, None, "valid YAML", clip(str(error), 120))]
    except RecursionError:
        return None, [InputProblem(shown, None, None, "valid YAML nested at most a few hundred levels deep",
                                   "nesting too deep to read")]
    finally:
        loader.dispose()
    problems = [
        InputProblem(shown, line, clip(str(key)), f"each key once in its mapping (first given on line {first})")
        for line, key, first in loader.duplicates
    ]
    return data, problems


def read_yaml(path: Path, shown: str) -> tuple[Any, list[InputProblem]]:
    """Parse a YAML file of the project folder."""
    text, problems = read_text(path, shown)
    if text is None:
        return None, problems
    return parse_yaml(text, shown)
