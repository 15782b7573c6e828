"""Incremental rebuilds of whole reports: after a change, a rebuild into the same output
folder (part cache) gives the same bytes, in all four outputs, as a build from scratch
(--no-cache into an empty folder), the project's rule for reproducible builds
(DEVELOPERS.md, "Byte-identical builds"). Full PDF builds: slow.
"""

from __future__ import annotations

import gc
import hashlib
import shutil
import weakref
from datetime import datetime, timezone
from pathlib import Path

import pytest

from reportgen import pipeline
from reportgen.export.atomic import OUTPUT_NAMES
from reportgen.pdf.cache import CACHE_DIR_NAME
from reportgen.report.render import templates_dir
from tests.builders import write_large_project

NOW = datetime(2030, 2, 1, 12, 0, tzinfo=timezone.utc)
LOGO = ('<svg xmlns="http://www.w3.org/2000/svg" width="60" height="20" viewBox="0 0 60 20">'
        '<rect width="60" height="20" fill="{colour}"/></svg>')


def _digests(out: Path) -> dict[str, str]:
    return {name: hashlib.sha256((out / name).read_bytes()).hexdigest() for name in OUTPUT_NAMES}


def _entries(out: Path) -> set[str]:
    return {path.name for path in (out / CACHE_DIR_NAME).glob("*.part")}


@pytest.fixture
def project(tmp_path: Path) -> Path:
    """24 links (three parts of link sheets and the appendix), a logo and one own template."""
    root = write_large_project(tmp_path / "project", links=24)
    yaml = (root / "project.yaml").read_text(encoding="utf-8")
    (root / "project.yaml").write_text(
        yaml.replace("contractor: {name: Test Cabling}",
                     "contractor: {name: Test Cabling, logo: assets/logo.svg}")
        + "report:\n  templates: look\n", encoding="utf-8")
    (root / "assets").mkdir()
    (root / "assets" / "logo.svg").write_text(LOGO.format(colour="#204060"), encoding="utf-8")
    (root / "look" / "partials").mkdir(parents=True)
    shutil.copy(templates_dir() / "partials" / "appendix.html.j2",
                root / "look" / "partials" / "appendix.html.j2")
    return root


def _rebuild_equals_full_build(project: Path, out: Path, scratch: Path) -> set[str]:
    """Rebuild into ``out`` and build from scratch into ``scratch``; same bytes. Returns the
    cache entries the rebuild reused."""
    before = _entries(out)
    pipeline.build(project, out, now=NOW, jobs=2)
    pipeline.build(project, scratch, now=NOW, jobs=2, cache=False)
    assert _digests(out) == _digests(scratch)
    assert not (scratch / CACHE_DIR_NAME).exists()
    return before & _entries(out)


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text(encoding="utf-8")
    assert old in text
    path.write_text(text.replace(old, new, 1), encoding="utf-8")


@pytest.mark.slow
def test_rebuilds_after_each_kind_of_change_equal_full_builds(project: Path, tmp_path: Path) -> None:
    out = tmp_path / "out"
    pipeline.build(project, out, now=NOW, jobs=2)
    first = _digests(out)
    assert len(_entries(out)) >= 5  # front matter (estimate and final may be one), 3 runs, appendix

    # one result of the first link: its run of sheets and the front matter change
    _edit(project / "results" / "day1.csv", "L00001,1,850,ab,1.00", "L00001,1,850,ab,1.40")
    reused = _rebuild_equals_full_build(project, out, tmp_path / "full-result")
    assert _digests(out) != first
    assert len(reused) >= 2  # at least the other runs of sheets came from the cache

    # one link's length (a link of the last run)
    _edit(project / "links.csv", "L00023,Room 1,Room 2,OM4,100,2", "L00023,Room 1,Room 2,OM4,180,2")
    assert len(_rebuild_equals_full_build(project, out, tmp_path / "full-link")) >= 2

    # the logo: same file name, other picture
    (project / "assets" / "logo.svg").write_text(LOGO.format(colour="#802020"), encoding="utf-8")
    _rebuild_equals_full_build(project, out, tmp_path / "full-logo")

    # the project's own appendix template
    _edit(project / "look" / "partials" / "appendix.html.j2", "</section>",
          "<p>Checked again after the retest.</p></section>")
    assert len(_rebuild_equals_full_build(project, out, tmp_path / "full-template")) >= 3


@pytest.mark.slow
def test_rebuild_with_our_templates_renders_only_the_pieces_a_result_touches(tmp_path: Path) -> None:
    # Our own templates cut the front matter and appendix into pieces (render.FRONT_SECTIONS,
    # APPENDIX_SECTIONS): one changed result touches the cover (the manifest digest), the
    # charts (every result is plotted), the list of input files, the run of sheets holding
    # the link and at most the register; the contents with the links needing action, the
    # appendix and the other runs come from the cache.
    project = write_large_project(tmp_path / "project", links=24)
    out = tmp_path / "out"
    pipeline.build(project, out, now=NOW, jobs=2)
    entries = _entries(out)
    assert len(entries) == 9  # cover, 3 front pieces, 3 runs of sheets, appendix, input files
    _edit(project / "results" / "day1.csv", "L00001,1,850,ab,1.00", "L00001,1,850,ab,1.40")
    reused = _rebuild_equals_full_build(project, out, tmp_path / "full")
    assert len(reused) >= len(entries) - 5


@pytest.mark.slow
def test_the_documents_are_dropped_before_the_pdf_is_finished(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # The finishing step is the merge's largest: the view model and the documents made
    # from it (their drawings) must be gone by then, and report.html whole.
    from reportgen.pdf import engine
    from reportgen.report import render
    from reportgen.report.link_views import ResultView

    made: list[weakref.ref[render.ReportDocument]] = []
    real_build_report, real_finish = render.build_report, engine.finish_pdf
    seen: list[bool] = []

    def build_report(*args: object, **kwargs: object) -> render.ReportDocument:
        document = real_build_report(*args, **kwargs)  # type: ignore[arg-type]
        made.append(weakref.ref(document))
        return document

    def finish_pdf(*args: object, **kwargs: object) -> None:
        # no collection here: the build's own must have freed the view model's cycles
        seen.append(made[0]() is None
                    and not any(isinstance(held, ResultView) for held in gc.get_objects()))
        real_finish(*args, **kwargs)  # type: ignore[arg-type]

    monkeypatch.setattr(render, "build_report", build_report)
    monkeypatch.setattr(engine, "finish_pdf", finish_pdf)
    root = write_large_project(tmp_path / "project", links=12)
    pipeline.build(root, tmp_path / "out", now=NOW, jobs=2, cache=False)
    assert seen == [True]
    assert (tmp_path / "out" / "report.html").read_text(encoding="utf-8").rstrip().endswith("</html>")
