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
"""

from __future__ import annotations

import mimetypes
import os
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
    """Return the ``file:`` URL of folder ``root`` with a trailing slash (a base URL)."""
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


class ProjectURLFetcher(URLFetcher):
    """WeasyPrint URL fetcher confined to ``data:`` URIs and files inside ``root``."""

    def __init__(self, root: Path, **kwargs: Any) -> None:
        kwargs.setdefault("allowed_protocols", ALLOWED_SCHEMES)
        kwargs["allow_redirects"] = False
        super().__init__(**kwargs)
        self.root = Path(os.path.realpath(root))

    def fetch(self, url: str, headers: Any = None) -> URLFetcherResponse:
        """Return the resource at ``url``, or raise :class:`RefusedURL` without reading."""
        scheme = url.split(":", 1)[0].strip().lower() if ":" in url else ""
        if scheme == "data":
            return super().fetch(url, headers)
        if scheme != "file":
            raise RefusedURL(f"only data: and file: URLs inside the project are read: {url}")
        path = resolve_file_url(url.split("?", 1)[0].split("#", 1)[0], self.root)
        if not path.is_file():
            raise RefusedURL(f"no such file in the project folder: {url}")
        content_type = mimetypes.guess_type(path.name)[0] or "application/octet-stream"
        # Read the real path that was checked, not the URL as written.
        return URLFetcherResponse(
            path.as_uri(), path.read_bytes(), headers={"Content-Type": content_type})


def make_url_fetcher(root: Path) -> ProjectURLFetcher:
    """Return a WeasyPrint URL fetcher that reads only ``data:`` URIs and files in ``root``."""
    return ProjectURLFetcher(root)
