"""A URL fetcher for WeasyPrint that reads nothing outside the project folder.

WeasyPrint fetches every URL it meets while rendering (images, stylesheets, SVG
``<image>``, ``<link rel=attachment>``) through its URL fetcher. The default one
reads any local file and any web address, so a report could embed ``/etc/passwd``
or call a server. The fetcher made here allows only

* ``data:`` URIs, and
* ``file:`` URLs whose real path (symbolic links resolved) lies inside the root
  folder given to :func:`make_url_fetcher`.

Anything else raises :class:`RefusedURL` before any I/O; WeasyPrint catches the
error, logs a warning and leaves the resource out.

Every fetcher here records what a render read (:attr:`ProjectURLFetcher.reads`): the
digest of each file, or ``None`` for one refused or missing. The part cache
(:mod:`reportgen.pdf.cache`) checks these again before it trusts a rendered part.
A render on another machine (:mod:`reportgen.pdf.cluster`) reads the project's files
through :class:`ShippedFilesFetcher`, from copies sent with the part: same URLs,
same bytes, same answers.
"""

from __future__ import annotations

import hashlib
import mimetypes
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Final
from urllib.parse import unquote, urlsplit
from urllib.request import url2pathname

from weasyprint.urls import URLFetcher, URLFetcherResponse

ALLOWED_SCHEMES: Final = ("data", "file")
LOCAL_HOSTS: Final = ("", "localhost")


class RefusedURL(ValueError):
    """A URL the report may not read."""


def root_url(root: Path) -> str:
    """Return the ``file:`` URL of folder ``root`` with a trailing slash (a base URL).

    A root that is already a real path (as sent to a cluster worker, where the folder
    need not exist) gives the same URL on every machine.
    """
    return Path(os.path.realpath(root)).as_uri().rstrip("/") + "/"


def resolve_file_url(url: str, root: Path) -> Path:
    """Return the real path of ``file:`` URL ``url`` if it lies inside ``root``.

    Raises
    ------
    RefusedURL
        If the URL names another host, or its real path (after ``..`` and symbolic
        links are resolved) is not ``root`` itself or below it.
    """
    parts = urlsplit(url)
    if parts.scheme.lower() != "file":
        raise RefusedURL(f"not a file: URL: {url}")
    if parts.netloc.lower() not in LOCAL_HOSTS:
        raise RefusedURL(f"file: URL on another host refused: {url}")
    real_root = Path(os.path.realpath(root))
    real_path = Path(os.path.realpath(url2pathname(unquote(parts.path))))
    if real_path != real_root and real_root not in real_path.parents:
        raise RefusedURL(f"file outside the project folder {real_root} refused: {url}")
    return real_path


def file_url(url: str) -> str:
    """``url`` without its query and fragment: the key of a file in :attr:`reads`."""
    return url.split("?", 1)[0].split("#", 1)[0]


def digest(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


@dataclass(frozen=True)
class ProjectFile:
    """A file a render read: the URL it was found at (symbolic links resolved) and its bytes."""

    real_url: str
    data: bytes


def read_project_file(url: str, root: Path) -> ProjectFile:
    """Read the file at ``file:`` URL ``url`` inside ``root`` or raise :class:`RefusedURL`."""
    path = resolve_file_url(file_url(url), root)
    if not path.is_file():
        raise RefusedURL(f"no such file in the project folder: {url}")
    # Read the real path that was checked, not the URL as written.
    return ProjectFile(path.as_uri(), path.read_bytes())


def _response(file: ProjectFile) -> URLFetcherResponse:
    name = file.real_url.rsplit("/", 1)[-1]
    content_type = mimetypes.guess_type(name)[0] or "application/octet-stream"
    return URLFetcherResponse(file.real_url, file.data, headers={"Content-Type": content_type})


def _scheme(url: str) -> str:
    return url.split(":", 1)[0].strip().lower() if ":" in url else ""


class ProjectURLFetcher(URLFetcher):
    """WeasyPrint URL fetcher confined to ``data:`` URIs and files inside ``root``."""

    def __init__(self, root: Path, **kwargs: Any) -> None:
        kwargs.setdefault("allowed_protocols", ALLOWED_SCHEMES)
        kwargs["allow_redirects"] = False
        super().__init__(**kwargs)
        self.root = Path(os.path.realpath(root))
        self.reads: dict[str, str | None] = {}  # file URL -> digest of its bytes, or None

    def fetch(self, url: str, headers: Any = None) -> URLFetcherResponse:
        """Return the resource at ``url``, or raise :class:`RefusedURL` without reading."""
        scheme = _scheme(url)
        if scheme == "data":
            return super().fetch(url, headers)
        if scheme != "file":
            raise RefusedURL(f"only data: and file: URLs inside the project are read: {url}")
        key = file_url(url)
        self.reads[key] = None
        file = self.read_file(url)
        self.reads[key] = digest(file.data)
        return _response(file)

    def read_file(self, url: str) -> ProjectFile:
        return read_project_file(url, self.root)


class ShippedFilesFetcher(ProjectURLFetcher):
    """The fetcher of a render on another machine: project files come with the part.

    ``files`` maps a file URL (under the same root URL as on the machine that sent the
    part) to the file it read there, or to ``None`` for one refused there. A URL not
    in ``files`` is refused here too and noted in :attr:`missing`: the sender reads
    those files and sends the part again (:mod:`reportgen.pdf.cluster`).
    """

    def __init__(self, root: Path, files: dict[str, ProjectFile | None], **kwargs: Any) -> None:
        super().__init__(root, **kwargs)
        self.root = Path(root)  # as on the sending machine; not resolved here
        self.files = files
        self.missing: set[str] = set()

    def read_file(self, url: str) -> ProjectFile:
        key = file_url(url)
        if key not in self.files:
            self.missing.add(key)
            raise RefusedURL(f"not sent with the part: {url}")
        file = self.files[key]
        if file is None:
            raise RefusedURL(f"refused on the machine that sent the part: {url}")
        return file


def make_url_fetcher(root: Path) -> ProjectURLFetcher:
    """Return a WeasyPrint URL fetcher that reads only ``data:`` URIs and files in ``root``."""
    return ProjectURLFetcher(root)
