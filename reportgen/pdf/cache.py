"""The part cache: rendered PDF parts kept between builds, so a rebuild renders only what changed.

A part's PDF depends on nothing but what goes into its render, so the cache key of
a part is a digest of all of it (:func:`render_environment` and :meth:`PartCache.key`):

* the part's HTML document (our templates' output, with the stylesheets inline, the
  logo and diagrams as ``data:`` URIs, and any page number a front matter prints);
* how it is read (``xml_first``) and the base URL (the project folder's real path);
* the versions of reportgen, WeasyPrint, pydyf and fontTools, the source of the
  modules that render a part (``weasy.py``, ``fetcher.py``), and the fonts installed
  (family, style, version and file size of every font fontconfig lists).

Files a render reads from the project folder (a project's own stylesheet or image,
referenced by URL) are not known before the render; each entry lists them with the
digest of their bytes (:attr:`reportgen.pdf.weasy.RenderedPart.resources`), and an
entry whose files changed is not used.

What depends on page numbers (the "Page X of Y" stamps, page slots, links, outline)
is not in any part: :mod:`reportgen.pdf.merge` rebuilds it on every build, and a
front matter that prints numbers as text has them in its HTML, hence in its key.

The cache lives in the output folder as ``.reportgen-cache/`` (:data:`CACHE_DIR_NAME`),
one file per part. It is safe to delete at any time. It is never trusted blindly:
each file starts with a format line, names its key and ends with the SHA-256 of all
that precedes it; a file that is damaged, of another format, or under a name that is
not its key is ignored (and its part rendered again). Entries are written to a
hidden temporary file and renamed into place, so a build killed part-way leaves only
whole entries (the next build uses them). The size is bounded: after a successful
build, :meth:`PartCache.prune` removes every entry that build did not use, so the
folder holds the parts of the last report (about the size of its PDF).

The entry format is JSON for the layout facts and the PDF bytes as they are; no
pickle, so a planted file cannot run code.
"""

from __future__ import annotations

import functools
import hashlib
import json
import logging
import os
import shutil
import subprocess
import tempfile
import threading
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Final

import fontTools
import pydyf
import weasyprint

from reportgen import __version__
from reportgen.pdf import fetcher as fetcher_module
from reportgen.pdf import weasy as weasy_module
from reportgen.pdf.fetcher import RefusedURL, digest, read_project_file, root_url
from reportgen.pdf.weasy import Anchor, Bookmark, InternalLink, PageFrame, PageSlot, RenderedPart

LOGGER = logging.getLogger(__name__)

CACHE_DIR_NAME: Final = ".reportgen-cache"
ENTRY_SUFFIX: Final = ".part"
TEMP_PREFIX: Final = ".partial-"
MAGIC: Final = b"reportgen part cache 1\n"
DIGEST_BYTES: Final = 32
HEADER_LENGTH_BYTES: Final = 8
FC_LIST_TIMEOUT_S: Final = 30


@functools.cache
def fonts_digest() -> str:
    """A digest of the fonts fontconfig offers WeasyPrint: family, style, version, file size.

    The same fonts give the same digest on every machine (paths and dates are left
    out), so it also tells whether a cluster worker lays text out as this machine does.
    """
    fc_list = shutil.which("fc-list")
    if fc_list is None:
        return "no fc-list"
    listed = subprocess.run(
        [fc_list, "--format", "%{family}\t%{style}\t%{fontversion}\t%{index}\t%{file}\n"],
        capture_output=True, text=True, check=False, timeout=FC_LIST_TIMEOUT_S).stdout
    lines = []
    for line in listed.splitlines():
        *facts, path = line.split("\t")
        try:
            size = os.stat(path).st_size
        except OSError:
            size = -1
        lines.append("\t".join([*facts, str(size)]))
    return hashlib.sha256("\n".join(sorted(lines)).encode("utf-8")).hexdigest()


@functools.cache
def render_environment() -> dict[str, str]:
    """Everything besides the document that shapes a rendered part, as text."""
    code = hashlib.sha256()
    for module in (weasy_module, fetcher_module):
        code.update(Path(module.__file__ or "").read_bytes())
    return {
        "reportgen": __version__,
        "weasyprint": weasyprint.__version__,
        "pydyf": pydyf.__version__,
        "fonttools": fontTools.version,
        "code": code.hexdigest(),
        "fonts": fonts_digest(),
    }


def part_key(html: str, root: Path, xml_first: bool) -> str:
    """The cache key of a part: a digest of its document and of what renders it."""
    facts = {"html": digest(html.encode("utf-8")), "xml_first": xml_first,
             "base_url": root_url(root), **render_environment()}
    return hashlib.sha256(json.dumps(facts, sort_keys=True).encode("utf-8")).hexdigest()


# Entry format: MAGIC, 8-byte big-endian header length, header (JSON), PDF bytes,
# SHA-256 of everything before it.

def _frame_json(frame: PageFrame) -> dict[str, Any]:
    return {
        "width_pt": frame.width_pt, "height_pt": frame.height_pt,
        "right_margin_pt": frame.right_margin_pt, "bottom_margin_pt": frame.bottom_margin_pt,
        "links": [[link.target, list(link.rect_pt)] for link in frame.links],
        "slots": [[slot.target, slot.left_pt, slot.right_pt, slot.baseline_pt, slot.size_pt,
                   list(slot.rgb), slot.flush_left] for slot in frame.slots],
    }


def _frame_from_json(data: dict[str, Any]) -> PageFrame:
    return PageFrame(
        width_pt=float(data["width_pt"]), height_pt=float(data["height_pt"]),
        right_margin_pt=float(data["right_margin_pt"]),
        bottom_margin_pt=float(data["bottom_margin_pt"]),
        links=tuple(InternalLink(str(target), (float(rect[0]), float(rect[1]), float(rect[2]),
                                               float(rect[3])))
                    for target, rect in data["links"]),
        slots=tuple(PageSlot(str(target), float(left), float(right), float(baseline),
                             float(size), (float(rgb[0]), float(rgb[1]), float(rgb[2])),
                             bool(flush_left))
                    for target, left, right, baseline, size, rgb, flush_left in data["slots"]),
    )


def encode_entry(key: str, part: RenderedPart) -> bytes:
    """The bytes of a cache entry holding ``part`` under ``key``."""
    header = json.dumps({
        "key": key,
        "pages": [_frame_json(frame) for frame in part.pages],
        "anchors": [[name, anchor.page_index, anchor.x_pt, anchor.y_pt]
                    for name, anchor in part.anchors.items()],
        "bookmarks": [[mark.anchor_id, mark.label, mark.level] for mark in part.bookmarks],
        "resources": [list(resource) for resource in part.resources],
        "pdf_bytes": len(part.pdf),
    }, ensure_ascii=True, separators=(",", ":")).encode("ascii")
    body = MAGIC + len(header).to_bytes(HEADER_LENGTH_BYTES, "big") + header + part.pdf
    return body + hashlib.sha256(body).digest()


class DamagedEntry(ValueError):
    """A cache file that is not a whole entry of this format for the key it is filed under."""


def decode_entry(key: str, data: bytes) -> RenderedPart:
    """The part in cache entry ``data`` filed under ``key``; :class:`DamagedEntry` if not one."""
    if not data.startswith(MAGIC) or len(data) < len(MAGIC) + HEADER_LENGTH_BYTES + DIGEST_BYTES:
        raise DamagedEntry("not a reportgen part cache entry of this format")
    body, checksum = data[:-DIGEST_BYTES], data[-DIGEST_BYTES:]
    if hashlib.sha256(body).digest() != checksum:
        raise DamagedEntry("checksum does not match (damaged or truncated)")
    start = len(MAGIC) + HEADER_LENGTH_BYTES
    length = int.from_bytes(body[len(MAGIC):start], "big")
    try:
        header = json.loads(body[start:start + length].decode("ascii"))
        if header["key"] != key:
            raise DamagedEntry("the entry belongs to another key")
        pdf = body[start + length:]
        if len(pdf) != header["pdf_bytes"] or not pdf.startswith(b"%PDF-"):
            raise DamagedEntry("the PDF in the entry is incomplete")
        return RenderedPart(
            pdf=pdf,
            pages=tuple(_frame_from_json(frame) for frame in header["pages"]),
            anchors={str(name): Anchor(int(page), float(x), float(y))
                     for name, page, x, y in header["anchors"]},
            bookmarks=tuple(Bookmark(str(anchor_id), str(label), int(level))
                            for anchor_id, label, level in header["bookmarks"]),
            resources=tuple((str(url), None if found is None else str(found))
                            for url, found in header["resources"]),
        )
    except DamagedEntry:
        raise
    except (ValueError, KeyError, TypeError, UnicodeDecodeError) as error:
        raise DamagedEntry(f"unreadable header ({type(error).__name__})") from None


def resources_unchanged(part: RenderedPart, root: Path) -> bool:
    """Whether every project file the part's render read still has the same bytes."""
    for url, found in part.resources:
        try:
            now: str | None = digest(read_project_file(url, root).data)
        except (RefusedURL, OSError):
            now = None
        if now != found:
            return False
    return True


@dataclass
class CacheStats:
    """What the cache did in one build, for the log and the progress line."""

    hits: int = 0
    misses: int = 0
    ignored: int = 0      # damaged, foreign or with changed files: rendered again
    written: int = 0


@dataclass
class PartCache:
    """The part cache in ``folder`` (``OUT/.reportgen-cache``); thread-safe."""

    folder: Path
    stats: CacheStats = field(default_factory=CacheStats)
    used: set[str] = field(default_factory=set)
    _lock: threading.Lock = field(default_factory=threading.Lock, repr=False)

    @classmethod
    def in_output_folder(cls, out_dir: Path) -> PartCache:
        return cls(Path(out_dir) / CACHE_DIR_NAME)

    def _path(self, key: str) -> Path:
        return self.folder / f"{key}{ENTRY_SUFFIX}"

    def get(self, key: str, root: Path) -> RenderedPart | None:
        """The part cached under ``key`` if there is a whole, matching entry; else None."""
        with self._lock:
            self.used.add(key)
        try:
            data = self._path(key).read_bytes()
        except OSError:
            self._count("misses")
            return None
        try:
            part = decode_entry(key, data)
        except DamagedEntry as error:
            LOGGER.info("part cache: entry %s… ignored: %s", key[:12], error)
            self._count("ignored")
            return None
        if not resources_unchanged(part, root):
            LOGGER.debug("part cache: entry %s… ignored: a file it read has changed", key[:12])
            self._count("ignored")
            return None
        self._count("hits")
        return part

    def put(self, key: str, part: RenderedPart) -> None:
        """Store ``part`` under ``key``, atomically; a failure to write is only logged."""
        with self._lock:
            self.used.add(key)
        try:
            self.folder.mkdir(parents=True, exist_ok=True)
            handle, temp_name = tempfile.mkstemp(prefix=TEMP_PREFIX, dir=self.folder)
            try:
                with os.fdopen(handle, "wb") as stream:
                    stream.write(encode_entry(key, part))
                    stream.flush()
                    os.fsync(stream.fileno())
                os.replace(temp_name, self._path(key))
            except BaseException:
                Path(temp_name).unlink(missing_ok=True)
                raise
        except OSError as error:
            LOGGER.warning("part cache: could not store a part (%s); the build goes on", error)
            return
        self._count("written")

    def prune(self, keep: Iterable[str] | None = None) -> None:
        """Remove entries not used by this build (or not in ``keep``) and temporary leftovers."""
        keep_names = {f"{key}{ENTRY_SUFFIX}" for key in (self.used if keep is None else keep)}
        try:
            entries = list(self.folder.iterdir())
        except OSError:
            return
        for path in entries:
            if path.name not in keep_names:
                try:
                    path.unlink()
                except OSError as error:
                    LOGGER.debug("part cache: could not remove %s: %s", path.name, error)

    def _count(self, what: str) -> None:
        with self._lock:
            setattr(self.stats, what, getattr(self.stats, what) + 1)
