"""DEVELOPERS.md names only things that exist: paths, commands, modules, functions, sections.

The guide is checked against the repository itself (the source of truth for what exists):

- every path in backticks, relative to the repository root (``PROJECT/...`` means a project
  folder and is looked up in demo_project/; a bare file name must be a file somewhere in the
  repository or one of the build's outputs); globs must match at least one file; link targets
  too;
- every ``reportgen ...`` command line in code: its first word after the options is a command
  of the command line, and the rest parses with that command's options;
- every dotted ``reportgen.x.y`` name: a module found by importlib, or an attribute of one;
- every ``name()``: a function or class defined somewhere in the package;
- every "§N" of docs/project-format.md: a section with that number.
"""
from __future__ import annotations

import ast
import glob
import importlib
import importlib.util
import re
import shlex
import tomllib
from pathlib import Path

import click

import reportgen
from reportgen.cli import cli
from reportgen.export.atomic import OUTPUT_NAMES

ROOT = Path(__file__).resolve().parent.parent
GUIDE = ROOT / "DEVELOPERS.md"
DEMO = ROOT / "demo_project"
# Named in the guide while being built; remove a name here once it exists.
PLANNED = {"tests/golden/"}
FILE_ENDINGS = (".py", ".md", ".toml", ".yaml", ".yml", ".csv", ".json", ".j2", ".css",
                ".html", ".pdf", ".svg", ".txt")


def _text() -> str:
    return GUIDE.read_text(encoding="utf-8")


def _fenced_blocks(text: str) -> list[tuple[str, list[str]]]:
    """(info string, lines) of every fenced code block."""
    blocks, current, info = [], None, ""
    for line in text.splitlines():
        if line.startswith("```"):
            if current is None:
                current, info = [], line[3:].strip()
            else:
                blocks.append((info, current))
                current = None
        elif current is not None:
            current.append(line)
    assert current is None, "unclosed code block in DEVELOPERS.md"
    return blocks


def _prose(text: str) -> str:
    """The text outside fenced code blocks."""
    return re.sub(r"^```.*?^```[^\n]*$", "", text, flags=re.S | re.M)


def _inline_code(text: str) -> list[str]:
    return re.findall(r"`([^`\n]+)`", _prose(text))


def _shell_lines(text: str) -> list[str]:
    return [line.split(" #")[0].strip() for info, lines in _fenced_blocks(text)
            if info in ("sh", "bash", "console") for line in lines]


def _looks_like_path(token: str) -> bool:
    return (not any(c.isspace() for c in token) and not token.startswith(("-", "http", "{"))
            and ("/" in token or token.endswith(FILE_ENDINGS)))


def _exists(token: str) -> bool:
    if token in PLANNED:
        return True
    base, rest = ROOT, token
    if token.startswith("PROJECT/"):
        base, rest = DEMO, token.removeprefix("PROJECT/")
    elif "/" not in token:  # a file of that name somewhere in the repository, or an output
        return token in OUTPUT_NAMES or any(ROOT.glob(f"**/{glob.escape(token)}"))
    if any(c in rest for c in "*?["):
        return bool(glob.glob(str(base / rest)))
    return (base / rest).exists()


def test_guide_exists_and_the_readme_links_to_it():
    assert GUIDE.is_file()
    assert "(DEVELOPERS.md)" in (ROOT / "README.md").read_text(encoding="utf-8")


def test_every_path_named_exists():
    text = _text()
    tokens = [t for t in _inline_code(text) if _looks_like_path(t)]
    tokens += [word for line in _shell_lines(text) for word in line.split() if _looks_like_path(word)]
    tokens += [target for target in re.findall(r"\]\(([^)#\s]+)", text) if "://" not in target]
    assert len(tokens) > 20  # the guide names its files; an empty scan would prove nothing
    assert [t for t in tokens if not _exists(t)] == []


def test_every_command_is_a_command_of_the_cli_with_its_options():
    text = _text()
    lines = [line for line in _inline_code(text) + _shell_lines(text)
             if re.search(r"(?<![\w./-])reportgen[ \t]", line)]
    assert lines  # the guide shows commands
    wrong = []
    for line in lines:
        words = shlex.split(re.split(r"(?<![\w./-])reportgen[ \t]+", line, maxsplit=1)[1])
        names = [w for w in words if not w.startswith("-")]
        if not names:  # options of the group alone, e.g. --version
            assert all(w in ("--version", "-h", "--help") for w in words), line
            continue
        command = cli.commands.get(names[0])
        if command is None:
            wrong.append(f"{line}: no command {names[0]!r}")
            continue
        args = words[words.index(names[0]) + 1:]
        if not args:  # the command named in a sentence
            continue
        try:
            command.make_context(names[0], list(args))
        except click.UsageError as error:
            wrong.append(f"{line}: {error}")
    assert wrong == []


def _resolve(dotted: str) -> bool:
    parts = dotted.split(".")
    for cut in range(len(parts), 0, -1):
        name = ".".join(parts[:cut])
        try:
            found = importlib.util.find_spec(name) is not None
        except ModuleNotFoundError:
            found = False
        if found:
            target = importlib.import_module(name)
            for attribute in parts[cut:]:
                if not hasattr(target, attribute):
                    return False
                target = getattr(target, attribute)
            return True
    return False


def test_every_module_and_dotted_name_exists():
    names = sorted(set(re.findall(r"(?<![\w/])reportgen(?:\.\w+)+", _text())))
    assert len(names) > 10
    assert [name for name in names if not _resolve(name)] == []


def test_every_function_called_by_name_is_defined_in_the_package():
    defined = set()
    for path in (ROOT / "reportgen").rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                defined.add(node.name)
    called = set(re.findall(r"\b([A-Za-z_]\w*)\(\)", _text()))
    assert called  # the pipeline picture names its entry points
    assert sorted(called - defined) == []


def test_every_stage_package_is_described():
    text = _text()
    stages = [path.parent.name for path in (ROOT / "reportgen").glob("*/__init__.py")]
    assert {"inputs", "engine", "report", "pdf", "export"} <= set(stages)
    assert [s for s in stages if f"`reportgen/{s}/`" not in text] == []


def test_every_section_of_the_format_cited_exists():
    headings = re.findall(r"^#+ (\d+(?:\.\d+)*)[. ]",
                          (ROOT / "docs" / "project-format.md").read_text(encoding="utf-8"), re.M)
    cited = set(re.findall(r"§(\d+(?:\.\d+)*)", _text()))
    assert cited
    assert sorted(cited - set(headings)) == []


def test_version_is_the_same_in_pyproject_and_package():
    # DEVELOPERS.md, "Releasing": the version lives in these two places.
    with (ROOT / "pyproject.toml").open("rb") as handle:
        assert tomllib.load(handle)["project"]["version"] == reportgen.__version__
