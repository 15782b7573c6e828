"""manifest.json: every file a report was made from, with its size and SHA-256.

The manifest is embedded in report.pdf with the files it lists; its own SHA-256, the
report's *digest*, is printed on every page of the PDF (shortened in the page stamp,
whole on the cover) and written to summary.json, so a printed page, the PDF and the
data files can each be tied to the same set of inputs. The manifest lists the input
files (under ``project/``) and results.csv; summary.json, which carries the digest,
cannot be listed in it.

OTDR trace files (``otdr/**/*.sor``) are embedded only within a size cap
(:func:`left_out`, docs/project-format.md §10.5): one over it is listed with its size and
SHA-256 and ``"embedded": false``, so ``reportgen verify --project`` can still check it.
"""
from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from datetime import datetime
from pathlib import PurePosixPath
from typing import Any, Final

from reportgen.model import Project

MANIFEST_FORMAT: Final = 1
MANIFEST_NAME: Final = "manifest.json"
RESULTS_NAME: Final = "results.csv"
SUMMARY_NAME: Final = "summary.json"
INPUT_PREFIX: Final = "project/"      # embedded name of an input file: project/<path>
SHORT_DIGEST_CHARS: Final = 16       # the page stamp's digest: 64 of its 256 bits
MIME_TYPES: Final = {
    ".csv": "text/csv", ".yaml": "application/yaml", ".yml": "application/yaml",
    ".json": "application/json", ".png": "image/png", ".jpg": "image/jpeg",
    ".jpeg": "image/jpeg", ".svg": "image/svg+xml", ".txt": "text/plain",
    ".tsv": "text/tab-separated-values",
    ".xlsx": "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
    ".xlsm": "application/vnd.ms-excel.sheet.macroEnabled.12",
    ".xls": "application/vnd.ms-excel", ".ods": "application/vnd.oasis.opendocument.spreadsheet",
}
OTHER_MIME_TYPE: Final = "application/octet-stream"
CAPPED_FOLDER: Final = "otdr/"       # the files the size cap applies to: OTDR trace files
CAPPED_SUFFIX: Final = ".sor"
MEGABYTE: Final = 10**6


def mime_type(path: str) -> str:
    """The MIME type of a file by its suffix (application/octet-stream when unknown)."""
    return MIME_TYPES.get(PurePosixPath(path).suffix.lower(), OTHER_MIME_TYPE)


def sha256_hex(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def is_capped(path: str) -> bool:
    """Whether the size cap applies to the input file at project-relative ``path``."""
    return path.startswith(CAPPED_FOLDER) and path.lower().endswith(CAPPED_SUFFIX)


def left_out(sizes: Mapping[str, int], file_cap_mb: float, total_cap_mb: float) -> frozenset[str]:
    """The input files not embedded in report.pdf: OTDR trace files over the size cap.

    In path order, a trace file is embedded when it is at most ``file_cap_mb`` megabytes
    (10**6 bytes) and the trace files embedded so far and it together are at most
    ``total_cap_mb``; every other trace file is left out. Other inputs are always embedded.
    """
    file_cap, total_cap = file_cap_mb * MEGABYTE, total_cap_mb * MEGABYTE
    total, out = 0, set()
    for path in sorted(sizes):
        if not is_capped(path):
            continue
        size = sizes[path]
        if size <= file_cap and total + size <= total_cap:
            total += size
        else:
            out.add(path)
    return frozenset(out)


def manifest_document(project: Project, inputs: Mapping[str, bytes], results_csv: bytes, *,
                      version: str, now: datetime, application_table: str,
                      not_embedded: frozenset[str] = frozenset()) -> dict[str, Any]:
    """The manifest: generator, limit set, application table version, then every file.

    ``inputs`` maps each project-relative path read (``Project.files_read``) to its
    bytes; ``application_table`` identifies the table the links were assessed with;
    ``not_embedded``: the paths of ``inputs`` left out of the PDF (:func:`left_out`), whose
    entries get ``"embedded": false`` and whose cap the manifest states.
    """
    files = [{"path": INPUT_PREFIX + path, "role": "input", "size": len(data),
              "sha256": sha256_hex(data), **({"embedded": False} if path in not_embedded else {})}
             for path, data in sorted(inputs.items())]
    files.append({"path": RESULTS_NAME, "role": "output", "size": len(results_csv),
                  "sha256": sha256_hex(results_csv)})
    capped = {"otdr_embed_cap": {"file_mb": project.report.otdr_file_mb,
                                 "total_mb": project.report.otdr_total_mb}} if not_embedded else {}
    return {
        "format": MANIFEST_FORMAT,
        "generator": f"reportgen {version}",
        "built_at": now.isoformat(),
        "project": project.info.title,
        "limit_set": project.limits.id,
        "limit_set_origin": project.limits.origin,
        "application_table": application_table,
        "files": files,
        **capped,
    }


def manifest_bytes(document: Mapping[str, Any]) -> bytes:
    """The manifest as written (sorted keys, fixed layout: the digest depends on every byte)."""
    return (json.dumps(document, indent=2, sort_keys=True, ensure_ascii=False) + "\n").encode()


def digest_of(manifest: bytes) -> str:
    """The report's digest: SHA-256 of the manifest's bytes, 64 hex digits."""
    return sha256_hex(manifest)


def short_digest(digest: str) -> str:
    return digest[:SHORT_DIGEST_CHARS]
