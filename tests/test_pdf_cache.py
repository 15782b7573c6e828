"""The part cache: rebuilds reuse parts and give the same bytes; bad entries are not trusted.

The reference for "the same PDF" is a render of the same parts without any cache
(render_pdf with cache=None): an incremental build must equal it byte for byte, the
project's rule for reproducible builds (DEVELOPERS.md, "Byte-identical builds").
Small documents (a few A5 pages each) keep these tests quick; full report builds are
in tests/test_incremental.py (slow).
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import pytest

from reportgen import cli, pipeline
from reportgen.export.atomic import write_outputs
from reportgen.pdf.cache import (
    CACHE_DIR_NAME,
    MAGIC,
    DamagedEntry,
    PartCache,
    decode_entry,
    encode_entry,
    part_key,
)
from reportgen.pdf.engine import RenderPlan, _render_bodies, render_pdf
from reportgen.pdf.weasy import RenderedPart, render_part
from tests.builders import RecordingSlots

CREATED = datetime(2030, 1, 15, 9, 30, tzinfo=timezone.utc)
CSS = ("<style>@page { size: A6; margin: 10mm } body { font-family: DejaVu Sans; font-size: 9pt }"
       " h1 { bookmark-level: none }</style>")
# a 1x1 PNG (the smallest valid image; PNG signature and chunks per ISO/IEC 15948)
PNG_BLACK = bytes.fromhex(
    "89504e470d0a1a0a0000000d4948445200000001000000010806000000"
    "1f15c4890000000d4944415478da63606060f80f0001040100f5a2b5a30000000049454e44ae426082")
PNG_WHITE = bytes.fromhex(
    "89504e470d0a1a0a0000000d4948445200000001000000010806000000"
    "1f15c4890000000d4944415478da63f8ffffff7f0009fb03fd05a3a2f80000000049454e44ae426082")


def document(body: str) -> str:
    return f"<html><head><title>t</title>{CSS}</head><body>{body}</body></html>"


def body(name: str, extra: str = "") -> str:
    return document(f'<h1 id="{name}" data-bookmark="{name}" data-bookmark-level="1">{name}</h1>'
                    f"<p>Sheet {name}.</p>{extra}")


def front(page_of: Mapping[str, int], total_pages: int) -> str:
    return document(f'<h1 id="cover">Cover</h1><p><a href="#b">b</a> is on page {page_of["b"]}'
                    f" of {total_pages}</p>")


BODIES = [body("a"), body("b"), body("c")]


def render(root: Path, bodies: list[str], cache: PartCache | None) -> bytes:
    return render_pdf(front, bodies, root=root, title="Cache test", created=CREATED,
                      workers=2, cache=cache)


def test_a_rebuild_takes_every_part_from_the_cache_and_gives_the_same_bytes(tmp_path: Path) -> None:
    out = tmp_path / "out"
    first = render(tmp_path, BODIES, PartCache.in_output_folder(out))
    again = PartCache.in_output_folder(out)
    second = render(tmp_path, BODIES, again)
    assert second == first == render(tmp_path, BODIES, None)
    # 3 bodies and the front matter twice (the estimate with placeholder numbers, then the
    # settled one), all found; nothing rendered or written
    assert (again.stats.hits, again.stats.misses, again.stats.written) == (5, 0, 0)
    assert (out / CACHE_DIR_NAME).is_dir()


def test_a_changed_part_is_rendered_again_and_only_it(tmp_path: Path) -> None:
    out = tmp_path / "out"
    render(tmp_path, BODIES, PartCache.in_output_folder(out))
    changed = [BODIES[0], body("b", "<p>A retest was added.</p>"), BODIES[2]]
    cache = PartCache.in_output_folder(out)
    incremental = render(tmp_path, changed, cache)
    assert incremental == render(tmp_path, changed, None)
    assert incremental != render(tmp_path, BODIES, None)
    assert (cache.stats.hits, cache.stats.misses) == (4, 1)


@pytest.mark.slow  # renders the small PDF three times or more
def test_progress_counts_cached_parts_up_to_the_total(tmp_path: Path) -> None:
    cache_out = tmp_path / "out"
    render(tmp_path, BODIES, PartCache.in_output_folder(cache_out))
    seen: list[tuple[int, int]] = []
    render_pdf(front, BODIES, root=tmp_path, title="Cache test", created=CREATED,
               cache=PartCache.in_output_folder(cache_out),
               progress=lambda done, total: seen.append((done, total)))
    assert seen == [(0, 4), (1, 4), (2, 4), (3, 4), (4, 4)]


def _entries(out: Path) -> list[Path]:
    return sorted((out / CACHE_DIR_NAME).glob("*.part"))


@pytest.mark.slow  # renders the small PDF three times or more
def test_a_damaged_entry_is_ignored_and_rendered_again(tmp_path: Path) -> None:
    out = tmp_path / "out"
    full = render(tmp_path, BODIES, PartCache.in_output_folder(out))
    for number, entry in enumerate(_entries(out)):
        data = bytearray(entry.read_bytes())
        if number % 2:
            data[len(data) // 2] ^= 0xFF          # one flipped byte
            entry.write_bytes(bytes(data))
        else:
            entry.write_bytes(bytes(data[: len(data) // 3]))  # cut short
    cache = PartCache.in_output_folder(out)
    assert render(tmp_path, BODIES, cache) == full
    assert cache.stats.hits == 0 and cache.stats.ignored == 5


@pytest.mark.slow  # renders the small PDF three times or more
def test_a_foreign_entry_is_ignored(tmp_path: Path) -> None:
    out = tmp_path / "out"
    full = render(tmp_path, BODIES, PartCache.in_output_folder(out))
    first, *others = _entries(out)
    for entry in others:                      # another part's entry under this name
        entry.write_bytes(first.read_bytes())
    first.write_bytes(b"not a cache entry at all")
    cache = PartCache.in_output_folder(out)
    assert render(tmp_path, BODIES, cache) == full
    assert cache.stats.hits == 0 and cache.stats.ignored == 5


@pytest.mark.slow  # renders the small PDF three times or more
def test_a_project_file_read_by_a_part_is_checked_again(tmp_path: Path) -> None:
    root = tmp_path / "project"
    root.mkdir()
    (root / "mark.png").write_bytes(PNG_BLACK)
    bodies = [body("a"), body("b", '<img src="mark.png" style="width: 20mm"/>')]
    out = tmp_path / "out"
    before = render(root, bodies, PartCache.in_output_folder(out))
    (root / "mark.png").write_bytes(PNG_WHITE)  # same HTML, other image
    cache = PartCache.in_output_folder(out)
    after = render(root, bodies, cache)
    assert after == render(root, bodies, None) and after != before
    assert cache.stats.ignored == 1


def test_entries_round_trip_exactly(tmp_path: Path) -> None:
    part = render_part(body("a", '<p><a href="#b">to b</a></p>'), tmp_path)
    key = part_key(body("a"), tmp_path, False)
    data = encode_entry(key, part)
    assert data.startswith(MAGIC)
    assert decode_entry(key, data) == part
    with pytest.raises(DamagedEntry):
        decode_entry("0" * 64, data)


def test_the_key_covers_the_document_the_parser_and_the_folder(tmp_path: Path) -> None:
    (tmp_path / "other").mkdir()
    key = part_key(BODIES[0], tmp_path, False)
    assert key == part_key(BODIES[0], tmp_path, False)
    assert len({key, part_key(BODIES[1], tmp_path, False), part_key(BODIES[0], tmp_path, True),
                part_key(BODIES[0], tmp_path / "other", False)}) == 4


@pytest.mark.slow  # renders the small PDF three times or more
def test_prune_keeps_only_the_entries_of_the_last_build(tmp_path: Path) -> None:
    out = tmp_path / "out"
    render(tmp_path, BODIES, PartCache.in_output_folder(out))
    old = set(_entries(out))
    (out / CACHE_DIR_NAME / ".partial-leftover").write_bytes(b"half")
    cache = PartCache.in_output_folder(out)
    render(tmp_path, [body("b", "<p>changed</p>"), body("y")], cache)
    now = set(_entries(out))
    assert {path.stem for path in now} == cache.used
    assert len(now) == 4 and len(old - now) == 4  # kept: the front matter's first estimate
    assert [path.name for path in (out / CACHE_DIR_NAME).iterdir()
            if not path.name.endswith(".part")] == []


def test_write_outputs_leaves_the_cache_folder_alone(tmp_path: Path) -> None:
    cache_dir = tmp_path / CACHE_DIR_NAME
    cache_dir.mkdir()
    (cache_dir / "kept.part").write_bytes(b"entry")
    write_outputs(tmp_path, {"summary.json": b"{}"})
    assert (cache_dir / "kept.part").read_bytes() == b"entry"


def test_a_data_only_build_neither_needs_nor_touches_the_cache(tmp_path: Path) -> None:
    project = Path(__file__).parent / "fixtures" / "small_project"
    out = tmp_path / "out"
    pipeline.build(project, out, report=False)
    assert not (out / CACHE_DIR_NAME).exists()
    (out / CACHE_DIR_NAME).mkdir()
    (out / CACHE_DIR_NAME / "kept.part").write_bytes(b"entry")
    pipeline.build(project, out, report=False, cache=False)
    assert (out / CACHE_DIR_NAME / "kept.part").read_bytes() == b"entry"


def test_jobs_default_to_the_cores_this_process_may_use() -> None:
    assert pipeline.default_jobs() == len(os.sched_getaffinity(0))


def test_build_options_are_offered_and_checked(capsys: pytest.CaptureFixture[str]) -> None:
    assert cli.main(["build", "--help"]) == 0
    shown = capsys.readouterr().out
    assert "--jobs" in shown and "--no-cache" in shown and "--cluster" in shown
    assert cli.main(["build", "--jobs", "0", "nowhere"]) == 2
    assert "--jobs" in capsys.readouterr().err


class _RecordingPlan(RenderPlan):
    def slots(self, workers: int | None = None) -> Any:
        return self.recorder


class _HalfCache:
    """A part cache holding every part but those named ``missing``."""

    def __init__(self, bodies: list[str], missing: set[int], events: list[str]) -> None:
        self.keys = {part_key(html, Path("/"), False): index for index, html in enumerate(bodies)}
        self.missing, self.events = missing, events

    def get(self, key: str, root: Path) -> RenderedPart | None:
        index = self.keys[key]
        self.events.append(f"look up {index}")
        return None if index in self.missing else RenderedPart(b"", (), {}, ())

    def put(self, key: str, part: RenderedPart) -> None:
        self.events.append(f"store {self.keys[key]}")


def test_cached_parts_are_found_while_the_changed_ones_render() -> None:
    # A rebuild must not wait for a changed part before it looks up the next ones: with
    # the only slot busy rendering part 0, parts 1-4 are found in the cache, and part 3
    # (missing) is held until the slot frees.
    bodies = [body(f"part {index}") for index in range(5)]
    events: list[str] = []
    plan = _RecordingPlan(1, _HalfCache(bodies, {0, 3}, events))  # type: ignore[arg-type]
    object.__setattr__(plan, "recorder", RecordingSlots(events))
    _render_bodies(bodies, Path("/"), 1, lambda done: events.append(f"done {done}"), False,
                   plan=plan)
    assert events == ["look up 0", "send 0",
                      "look up 1", "done 1", "look up 2", "done 2", "look up 3", "look up 4",
                      "done 3", "back 0", "store 0", "done 4", "send 3", "back 3", "store 3",
                      "done 5"]
