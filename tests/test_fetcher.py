"""The URL fetcher reads data: URIs and files inside the project folder, nothing else.

Each refusal is checked on the finished PDF (pypdf lists its images and attachments),
next to a control showing that the same resource inside the project does get in.
"""

from __future__ import annotations

import http.server
import io
import struct
import threading
import zlib
from collections.abc import Iterator
from datetime import datetime, timezone
from pathlib import Path

import pypdf
import pytest

from reportgen.pdf.fetcher import RefusedURL, make_url_fetcher, resolve_file_url
from reportgen.pdf.engine import render_pdf
from reportgen.pdf.weasy import render_part

CREATED = datetime(2030, 1, 15, tzinfo=timezone.utc)


def png_bytes() -> bytes:
    """A valid 1×1 grey PNG, built by hand (PNG specification, ISO/IEC 15948)."""
    def chunk(kind: bytes, data: bytes) -> bytes:
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data)))
    header = struct.pack(">IIBBBBB", 1, 1, 8, 0, 0, 0, 0)  # 1×1, 8-bit greyscale
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", header)
            + chunk(b"IDAT", zlib.compress(b"\x00\x80")) + chunk(b"IEND", b""))


@pytest.fixture
def folders(tmp_path: Path) -> tuple[Path, Path]:
    """A project folder with an image and a note, and a folder outside it with the same."""
    root, outside = tmp_path / "project", tmp_path / "outside"
    for folder in (root, outside):
        folder.mkdir()
        (folder / "image.png").write_bytes(png_bytes())
        (folder / "note.txt").write_text("secret", encoding="utf-8")
    return root, outside


def image_count(pdf: bytes) -> int:
    return sum(len(page.images) for page in pypdf.PdfReader(io.BytesIO(pdf)).pages)


def attachments(pdf: bytes) -> list[str]:
    return list(pypdf.PdfReader(io.BytesIO(pdf)).attachments)


def render(body: str, root: Path) -> bytes:
    return render_part(f"<html><head></head><body>{body}</body></html>", root).pdf


@pytest.fixture
def web_server() -> Iterator[tuple[str, list[str]]]:
    """A local HTTP server serving a PNG; yields its URL and the paths it was asked for."""
    requests: list[str] = []

    class Handler(http.server.BaseHTTPRequestHandler):
        def do_GET(self) -> None:  # noqa: N802 (http.server's name)
            requests.append(self.path)
            self.send_response(200)
            self.send_header("Content-Type", "image/png")
            self.end_headers()
            self.wfile.write(png_bytes())

        def log_message(self, *args: object) -> None:
            pass

    server = http.server.HTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_port}", requests
    finally:
        server.shutdown()
        server.server_close()


def test_images_and_attachments_inside_the_project_are_read(folders: tuple[Path, Path]) -> None:
    root, _ = folders
    pdf = render('<link rel="attachment" href="note.txt"><img src="image.png">'
                 '<img src="data:image/png;base64,iVBORw0KGgoAAAANSUhEUgAAAAEAAAABCAAAAAA6fptVAAAACklE'
                 'QVR4nGOIAAAAgQCAnqjqbAAAAABJRU5ErkJggg==">', root)
    assert image_count(pdf) == 2
    assert attachments(pdf) == ["note.txt"]


def test_attachment_of_a_system_file_is_refused(folders: tuple[Path, Path]) -> None:
    root, outside = folders
    pdf = render('<link rel="attachment" href="file:///etc/passwd">'
                 f'<link rel="attachment" href="{(outside / "note.txt").as_uri()}">', root)
    assert attachments(pdf) == []


def test_http_image_is_never_requested(folders: tuple[Path, Path],
                                       web_server: tuple[str, list[str]]) -> None:
    root, _ = folders
    url, requests = web_server
    pdf = render(f'<img src="{url}/x.png"><img src="http://127.0.0.1:9/x.png">'
                 f'<svg width="20" height="20"><image href="{url}/svg.png" width="20" '
                 'height="20"/></svg>', root)
    assert image_count(pdf) == 0
    assert requests == []


def test_svg_image_outside_the_project_is_refused(folders: tuple[Path, Path]) -> None:
    root, outside = folders
    svg = ('<svg width="20" height="20"><image href="{}" width="20" height="20"/>'
           '<image href="file:///etc/hostname" width="20" height="20"/></svg>')
    assert image_count(render(svg.format("image.png"), root)) == 1  # control
    assert image_count(render(svg.format((outside / "image.png").as_uri()), root)) == 0


def test_parent_directory_escape_is_refused(folders: tuple[Path, Path]) -> None:
    root, _ = folders
    assert image_count(render('<img src="../outside/image.png">', root)) == 0


def test_symlink_pointing_out_of_the_project_is_refused(folders: tuple[Path, Path]) -> None:
    root, outside = folders
    (root / "linked.png").symlink_to(outside / "image.png")
    (root / "linked-dir").symlink_to(outside, target_is_directory=True)
    pdf = render('<img src="linked.png"><img src="linked-dir/image.png">'
                 '<link rel="attachment" href="linked-dir/note.txt">', root)
    assert image_count(pdf) == 0
    assert attachments(pdf) == []


def test_symlink_inside_the_project_is_followed(folders: tuple[Path, Path]) -> None:
    root, _ = folders
    (root / "alias.png").symlink_to(root / "image.png")
    assert image_count(render('<img src="alias.png">', root)) == 1


def test_whole_report_render_uses_the_safe_fetcher(folders: tuple[Path, Path]) -> None:
    root, _ = folders
    hostile = ('<html><head><link rel="attachment" href="file:///etc/passwd"></head>'
               '<body><img src="../outside/image.png"><p>body</p></body></html>')
    pdf = render_pdf(lambda page_of, total: hostile, [hostile], root=root, title="t",
                     created=CREATED)
    assert image_count(pdf) == 0
    assert attachments(pdf) == []


@pytest.mark.parametrize("url", [
    "file:///etc/passwd",
    "file://otherhost/{root}/image.png",
    "file://{root}/../outside/image.png",
    "file://{root}/%2e%2e/outside/image.png",
])
def test_resolve_file_url_refuses_paths_out_of_root(folders: tuple[Path, Path],
                                                    url: str) -> None:
    root, _ = folders
    with pytest.raises(RefusedURL):
        resolve_file_url(url.format(root=root), root)


@pytest.mark.parametrize("url", ["http://127.0.0.1:9/x.png", "https://example.org/a.css",
                                 "ftp://example.org/x", "javascript:alert(1)"])
def test_fetcher_refuses_other_schemes_before_any_io(tmp_path: Path, url: str) -> None:
    with pytest.raises(RefusedURL):
        make_url_fetcher(tmp_path).fetch(url)


def test_fetcher_reads_a_project_file(folders: tuple[Path, Path]) -> None:
    root, _ = folders
    response = make_url_fetcher(root).fetch((root / "note.txt").as_uri())
    assert response.read() == b"secret"
    assert response.content_type == "text/plain"
