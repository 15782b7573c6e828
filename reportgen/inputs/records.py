"""Test-method records: ``references/*.csv`` and ``inspections/*.csv`` (both optional).

A reference row says when and how a power meter was referenced at one wavelength; an
inspection row gives the end-face inspection of one strand at one link end, optionally
with a picture inside the project folder. Pictures are checked like the logo (inside the
folder, .png/.jpg/.jpeg, at most ``MAX_IMAGE_BYTES``, content matching the ending), decoded
with Pillow and downscaled to at most ``IMAGE_MAX_PX`` on the longer side, stored as
JPEG (quality 80): each picture adds at most about 40 KB to the report (pure noise, the
worst case; an end-face picture a few KB).
Rows are checked one by one (record files are short); every problem is collected.
"""
from __future__ import annotations

import io
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Final

from reportgen.errors import InputProblem
from reportgen.inputs.checker import DECIMAL_COMMA_TEXT, DECIMAL_HINT, NUMBER_TEXT, WAVELENGTH_RANGE_NM, enum_choices, match_enum
from reportgen.inputs.csvread import CsvTable, read_csv
from reportgen.inputs.files import clip, is_inside, outside_problem, resolve_inside, shown_path, size_in_mb
from reportgen.inputs.results import _parse_timestamp
from reportgen.model import (
    Inspection,
    InspectionImage,
    InspectionResult,
    Instrument,
    Link,
    LinkEnd,
    Reference,
    ReferenceMethod,
)

REFERENCES_DIR: Final = "references"
INSPECTIONS_DIR: Final = "inspections"
REFERENCE_REQUIRED: Final = (("instrument",), ("wavelength_nm",), ("reference_dbm",), ("set_at",),
                             ("method",))
REFERENCE_OPTIONAL: Final = ("cords", "cord_check_db", "note")
INSPECTION_REQUIRED: Final = (("link_id",), ("end",), ("result",), ("inspected_at",))
INSPECTION_OPTIONAL: Final = ("strand", "criteria", "technician", "image", "note")
MAX_IMAGE_BYTES: Final = 2 * 2**20  # as the logo
IMAGE_MAX_PX: Final = 240  # longer side after downscaling
IMAGE_QUALITY: Final = 80  # JPEG quality of the stored picture
IMAGE_KINDS: Final = {".png": "image/png", ".jpg": "image/jpeg", ".jpeg": "image/jpeg"}
EMPTY: Final = " (the cell is empty)"
TIME_TEXT: Final = "a date and time in ISO 8601, e.g. 2026-04-14T08:30"


def record_files(root: Path, folder_name: str, problems: list[InputProblem]) -> list[tuple[Path, str]] | None:
    """``folder_name/*.csv`` sorted by name, with the name problems show; None without the folder."""
    folder = root / folder_name
    if folder.is_symlink() and not is_inside(root, folder):
        problems.append(InputProblem(folder_name, None, None,
                                     "a folder inside the project folder; this is a symbolic link "
                                     "leading outside it and was not read"))
        return []
    if not folder.exists():
        return None
    if not folder.is_dir():
        problems.append(InputProblem(folder_name, None, None, f"a folder of {folder_name} CSV files"))
        return []
    found = []
    for path in sorted(folder.iterdir(), key=lambda path: path.name):
        if path.suffix.lower() != ".csv" or path.name.startswith((".", "~$")):
            continue
        shown = f"{folder_name}/{path.name}"
        if not is_inside(root, path):
            problems.append(outside_problem(shown))
        elif path.is_file():
            found.append((path, shown))
    return found


def _number(text: str) -> float | None:
    return float(text) if NUMBER_TEXT.fullmatch(text) else None


def _hint(text: str) -> str:
    return DECIMAL_HINT if DECIMAL_COMMA_TEXT.fullmatch(text) else ""


def _ids(text: str) -> tuple[str, ...]:
    return tuple(part.strip() for part in text.split(";") if part.strip())


def load_references(root: Path, instruments: Sequence[Instrument] | None, files: list[str]
                    ) -> tuple[tuple[Reference, ...] | None, list[InputProblem]]:
    """Every row of references/*.csv; None when the folder does not exist.

    ``instruments`` is the catalogue of project.yaml (None when it could not be read: ids
    are then not checked). Files read are appended to ``files``.
    """
    problems: list[InputProblem] = []
    paths = record_files(root, REFERENCES_DIR, problems)
    if paths is None:
        return None, problems
    known = None if instruments is None else {i.id for i in instruments}
    references: list[Reference] = []
    for path, shown in paths:
        files.append(shown)
        table, table_problems = read_csv(path, shown, required=REFERENCE_REQUIRED,
                                         optional=REFERENCE_OPTIONAL,
                                         decimal=("reference_dbm", "cord_check_db"))
        problems += table_problems
        if table is None:
            continue
        rows, row_problems = _reference_rows(table, known)
        references += rows
        problems += row_problems
    return tuple(references), sorted(problems, key=lambda p: (p.file, p.line or 0))


def _reference_rows(table: CsvTable, known: set[str] | None
                    ) -> tuple[list[Reference], list[InputProblem]]:
    blank = [""] * len(table)
    get = {name: table.columns.get(name, blank)
           for name in (*(g[0] for g in REFERENCE_REQUIRED), *REFERENCE_OPTIONAL)}
    absent = {g[0] for g in REFERENCE_REQUIRED if not table.has(g[0])}
    out: list[Reference] = []
    problems: list[InputProblem] = []
    low, high = WAVELENGTH_RANGE_NM
    for row, line in enumerate(table.lines):
        if line in table.unreadable:
            continue
        found: list[InputProblem] = []

        def problem(column: str, expected: str, text: str | None) -> None:
            if column not in absent:
                found.append(InputProblem(table.file, line, column, expected,
                                          None if text is None else clip(text)))

        instrument = get["instrument"][row]
        if not instrument:
            problem("instrument", "the id of the power meter referenced" + EMPTY, None)
        elif known is not None and instrument not in known:
            problem("instrument", "an instrument id listed under instruments in project.yaml",
                    instrument)
        text = get["wavelength_nm"][row]
        wavelength = _number(text)
        if wavelength is None or wavelength != int(wavelength) or not low <= wavelength <= high:
            problem("wavelength_nm", f"a wavelength in whole nm from {low} to {high}"
                    + ("" if text else EMPTY), text or None)
            wavelength = None
        text = get["reference_dbm"][row]
        power = _number(text)
        if power is None or not -80 <= power <= 30:
            problem("reference_dbm", "the reference power in dBm, from -80 to 30" + _hint(text)
                    + ("" if text else EMPTY), text or None)
            power = None
        text = get["set_at"][row]
        set_at = _parse_timestamp(text) if text else None
        if set_at is None:
            problem("set_at", TIME_TEXT + ("" if text else EMPTY), text or None)
        text = get["method"][row]
        method = match_enum(ReferenceMethod, text) if text else None
        if method is None:
            problem("method", f"one of {enum_choices(ReferenceMethod)}" + ("" if text else EMPTY),
                    text or None)
        cords = _ids(get["cords"][row])
        for cord in cords:
            if known is not None and cord not in known:
                problem("cords", "test cord ids listed under instruments in project.yaml, "
                                 "separated by ';'", cord)
        text = get["cord_check_db"][row]
        cord_check = None
        if text:
            cord_check = _number(text)
            if cord_check is None or not -1 <= cord_check <= 10:
                problem("cord_check_db", "the test cord verification reading in dB, from -1 to 10"
                        + _hint(text), text)
                cord_check = None
        problems += found
        if found or None in (wavelength, power, set_at, method):
            continue
        out.append(Reference(instrument=instrument, wavelength_nm=int(wavelength),
                             reference_dbm=power, set_at=set_at, cords=cords, method=method,
                             cord_check_db=cord_check, source_file=table.file, source_line=line))
    return out, problems


def load_inspections(root: Path, links: Mapping[str, Link] | None, files: list[str]
                     ) -> tuple[tuple[Inspection, ...] | None, list[InputProblem]]:
    """Every row of inspections/*.csv with its picture read; None without the folder.

    ``links`` are the valid links by id (None when links.csv could not be read: link ids
    and strands are then not checked). Files read (CSV and pictures) are appended to ``files``.
    """
    problems: list[InputProblem] = []
    paths = record_files(root, INSPECTIONS_DIR, problems)
    if paths is None:
        return None, problems
    inspections: list[Inspection] = []
    for path, shown in paths:
        files.append(shown)
        table, table_problems = read_csv(path, shown, required=INSPECTION_REQUIRED,
                                         optional=INSPECTION_OPTIONAL)
        problems += table_problems
        if table is None:
            continue
        rows, row_problems = _inspection_rows(root, table, links, files)
        inspections += rows
        problems += row_problems
    return tuple(inspections), sorted(problems, key=lambda p: (p.file, p.line or 0))


def _inspection_rows(root: Path, table: CsvTable, links: Mapping[str, Link] | None,
                     files: list[str]) -> tuple[list[Inspection], list[InputProblem]]:
    blank = [""] * len(table)
    get = {name: table.columns.get(name, blank)
           for name in (*(g[0] for g in INSPECTION_REQUIRED), *INSPECTION_OPTIONAL)}
    absent = {g[0] for g in INSPECTION_REQUIRED if not table.has(g[0])}
    out: list[Inspection] = []
    problems: list[InputProblem] = []
    for row, line in enumerate(table.lines):
        if line in table.unreadable:
            continue
        found: list[InputProblem] = []

        def problem(column: str, expected: str, text: str | None) -> None:
            if column not in absent:
                found.append(InputProblem(table.file, line, column, expected,
                                          None if text is None else clip(text)))

        link_id = get["link_id"][row]
        link = None
        if not link_id:
            problem("link_id", "a link_id from links.csv" + EMPTY, None)
        elif links is not None:
            link = links.get(link_id)
            if link is None:
                problem("link_id", "a link_id from links.csv", link_id)
        text = get["strand"][row]
        strand = 1
        if text:
            number = _number(text)
            top = link.strands if link is not None else 1000
            if number is None or number != int(number) or not 1 <= number <= top:
                problem("strand", f"a strand number from 1 to {top}", text)
                strand = None
            else:
                strand = int(number)
        text = get["end"][row]
        end = match_enum(LinkEnd, text) if text else None
        if end is None:
            problem("end", "a or b (the link end as in links.csv end_a, end_b)"
                    + ("" if text else EMPTY), text or None)
        text = get["result"][row]
        result = match_enum(InspectionResult, text) if text else None
        if result is None:
            problem("result", f"one of {enum_choices(InspectionResult)}" + ("" if text else EMPTY),
                    text or None)
        text = get["inspected_at"][row]
        inspected_at = _parse_timestamp(text) if text else None
        if inspected_at is None:
            problem("inspected_at", TIME_TEXT + ("" if text else EMPTY), text or None)
        image = None
        if get["image"][row]:
            image, image_problem = read_image(root, get["image"][row])
            if image_problem is not None:
                problem("image", image_problem, get["image"][row])
            elif image is not None:
                files.append(image.path)
        problems += found
        if found or None in (strand, end, result, inspected_at):
            continue
        out.append(Inspection(link_id=link_id, strand=strand, end=end, result=result,
                              inspected_at=inspected_at, criteria=get["criteria"][row] or None,
                              technician=get["technician"][row] or None, image=image,
                              source_file=table.file, source_line=line,
                              note=get["note"][row] or None))
    return out, problems


def read_image(root: Path, written: str) -> tuple[InspectionImage | None, str | None]:
    """A picture inside the project folder, downscaled; (None, what was expected) when unusable."""
    resolved = resolve_inside(root, written)
    if resolved is None:
        return None, "a path to a picture inside the project folder (symbolic links are followed)"
    if not resolved.is_file():
        return None, "an existing picture file inside the project folder"
    suffix = resolved.suffix.lower()
    if suffix not in IMAGE_KINDS:
        return None, "a picture file ending .png, .jpg or .jpeg"
    size = resolved.stat().st_size
    if size > MAX_IMAGE_BYTES:
        return None, (f"a picture of at most {size_in_mb(MAX_IMAGE_BYTES)} MB; "
                      f"this one is {size_in_mb(size)} MB")
    data = resolved.read_bytes()
    png = data.startswith(b"\x89PNG\r\n\x1a\n")
    jpeg = data.startswith(b"\xff\xd8\xff")
    if (suffix == ".png" and not png) or (suffix != ".png" and not jpeg):
        return None, f"a file whose content is a {suffix[1:].upper()} image"
    from PIL import Image, UnidentifiedImageError

    try:
        with Image.open(io.BytesIO(data)) as picture:
            if picture.width * picture.height > 40_000_000:
                return None, "a picture of at most 40 megapixels"
            picture.load()
            shown = picture.convert("RGB")
    except (UnidentifiedImageError, OSError, ValueError, Image.DecompressionBombError):
        return None, f"a {suffix[1:].upper()} image that can be decoded (the file is damaged)"
    shown.thumbnail((IMAGE_MAX_PX, IMAGE_MAX_PX))
    out = io.BytesIO()
    shown.save(out, format="JPEG", quality=IMAGE_QUALITY, optimize=True)
    return InspectionImage(path=shown_path(root, resolved), mime="image/jpeg", data=out.getvalue(),
                           width=shown.width, height=shown.height), None
