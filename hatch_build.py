"""Build hook: compile the report's gettext catalogues (.po -> .mo) into the wheel.

The repository holds only the source catalogues (reportgen/locale/<code>/LC_MESSAGES/reportgen.po);
a built wheel carries each one compiled, beside it, so an installed reportgen reads the .mo
files. An editable install needs nothing: reportgen.report.i18n compiles a .po in memory when
its .mo is missing or older. Fuzzy entries are left out, as gettext does; the tests require
every entry translated and none fuzzy.
"""
from __future__ import annotations

import shutil
import tempfile
from pathlib import Path
from typing import Any

from hatchling.builders.hooks.plugin.interface import BuildHookInterface

LOCALE = Path("reportgen") / "locale"


class CatalogueBuildHook(BuildHookInterface):
    PLUGIN_NAME = "custom"

    def initialize(self, version: str, build_data: dict[str, Any]) -> None:
        if self.target_name != "wheel" or version == "editable":
            return
        from babel.messages import mofile, pofile

        self._out = Path(tempfile.mkdtemp(prefix="reportgen-mo-"))
        for source in sorted((Path(self.root) / LOCALE).glob("*/LC_MESSAGES/*.po")):
            relative = source.relative_to(self.root).with_suffix(".mo")
            target = self._out / relative
            target.parent.mkdir(parents=True, exist_ok=True)
            code = source.parent.parent.name
            with source.open("rb") as handle:
                catalog = pofile.read_po(handle, locale=code)
            with target.open("wb") as handle:
                mofile.write_mo(handle, catalog, use_fuzzy=False)
            build_data["force_include"][str(target)] = relative.as_posix()

    def finalize(self, version: str, build_data: dict[str, Any], artifact_path: str) -> None:
        out = getattr(self, "_out", None)
        if out is not None:
            shutil.rmtree(out, ignore_errors=True)
