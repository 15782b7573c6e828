"""compare.html and the estate overview: Jinja templates in templates/archive/.

The same sandboxed, autoescaping, strict environment rules as the report (DEVELOPERS.md):
link ids and site names are input text, escaped, never marked safe. Numbers go through the
``db`` filter (reportgen.units.format_db), as in the report.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import jinja2
from jinja2.sandbox import ImmutableSandboxedEnvironment

from reportgen.units import format_db


def _db(value: float | None) -> str:
    return "–" if value is None else format_db(value)


def _signed_db(value: float | None) -> str:
    if value is None:
        return "–"
    text = format_db(value)
    return text if text.startswith("-") or float(text) == 0 else "+" + text


def environment(templates: Path) -> jinja2.Environment:
    env = ImmutableSandboxedEnvironment(
        loader=jinja2.FileSystemLoader(str(Path(templates) / "archive")),
        autoescape=True, undefined=jinja2.StrictUndefined, trim_blocks=True,
        lstrip_blocks=True, keep_trailing_newline=True)
    env.filters["db"] = _db
    env.filters["signed_db"] = _signed_db
    return env


def render(templates: Path, name: str, context: Mapping[str, Any]) -> str:
    return environment(templates).get_template(name).render(**context)


def verdict_counts(rows: Sequence[Mapping[str, Any]]) -> dict[str, int]:
    return {verdict: sum(1 for row in rows if row["verdict"] == verdict)
            for verdict in ("pass", "fail", "incomplete")}
