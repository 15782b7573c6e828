"""Stamp "Page X of Y" on every page of the merged report, and fill the page slots.

The parts are rendered separately, so no part knows its absolute page numbers or
the total; the numbers are written afterwards, as one small content stream per page
appended to the merged file (pikepdf). The same stream writes the page number of each page slot left
by the front matter (:class:`reportgen.pdf.weasy.PageSlot`). The text is set in
DejaVu Sans, subset to the characters used and embedded once (a simple TrueType
font, WinAnsi encoding, with a ToUnicode CMap mapping each code used to its character, so
text extraction and PDF/A level U hold for the stamp too). If no DejaVu Sans font file is found the build stops with a
message naming the package to install: report.pdf is an archive file (PDF/A-3u), where
every font must be embedded, so there is no fallback to an unembedded standard font.

Each page's original content is wrapped in ``q … Q`` so that the graphics state a
part leaves behind (WeasyPrint flips the y axis) cannot move the stamp. What the stamp
draws is marked as an artifact (``/Artifact BMC … EMC``, ISO 32000-1, 14.8.2.2), so
that in a tagged report it stands outside the structure tree, as page numbers should.

The font and the streams are added with pikepdf's documented ``Pdf.make_stream`` and
``Pdf.make_indirect``; qpdf compresses the streams when the file is saved.
"""

from __future__ import annotations

import hashlib
import io
import shutil
import subprocess
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Final

from fontTools import subset
from fontTools.ttLib import TTFont
from pikepdf import Array, Dictionary, Name, Object, Pdf

from reportgen.errors import ReportgenError
from reportgen.pdf.weasy import PageFrame, PageSlot

STAMP_FONT_SIZE_PT: Final = 8.0
STAMP_FONT_RESOURCE: Final = "/RgStampFont"
STAMP_ENCODING: Final = "cp1252"  # WinAnsiEncoding
FALLBACK_ADVANCE_EM: Final = 0.556  # a digit's width, for a character missing from the table
CAP_HEIGHT_EM: Final = 0.73
FONT_PACKAGE_HINT: Final = ("install DejaVu Sans (Debian/Ubuntu: apt-get install fonts-dejavu-core; "
                             "other systems: the 'DejaVu Sans' font from their package manager)")
DEJAVU_CANDIDATES: Final = (
    "/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf",
    "/usr/share/fonts/dejavu/DejaVuSans.ttf",
    "/usr/share/fonts/TTF/DejaVuSans.ttf",
    "/usr/local/share/fonts/DejaVuSans.ttf",
    "/Library/Fonts/DejaVuSans.ttf",
)


@dataclass(frozen=True)
class StampFont:
    """A font resource in the merged file and the advance width of each character."""

    reference: Object
    advance_em: dict[str, float]
    embedded: bool

    def width_pt(self, text: str, size_pt: float) -> float:
        return sum(self.advance_em.get(char, FALLBACK_ADVANCE_EM) for char in text) * size_pt


def find_dejavu_sans() -> Path | None:
    """Return the path of DejaVuSans.ttf, from known places or fontconfig, or ``None``."""
    for candidate in DEJAVU_CANDIDATES:
        if Path(candidate).is_file():
            return Path(candidate)
    if shutil.which("fc-match"):
        found = subprocess.run(
            ["fc-match", "--format=%{file}", "DejaVu Sans:style=Book"],
            capture_output=True, text=True, check=False).stdout.strip()
        if found.endswith("DejaVuSans.ttf") and Path(found).is_file():
            return Path(found)
    return None


def check_label_text(texts: Iterable[str]) -> str:
    """Return the sorted characters of ``texts``; they must all be in WinAnsi (cp1252)."""
    chars = sorted(set("".join(texts)))
    for char in chars:
        try:
            char.encode(STAMP_ENCODING)
        except UnicodeEncodeError:
            raise ValueError(
                f"page label character {char!r} is not supported by the page-number stamp "
                f"(expected characters of the Windows-1252 set)") from None
    return "".join(chars)


def _subset_tag(chars: str) -> str:
    digest = hashlib.sha256(chars.encode("utf-8")).digest()
    return "".join(chr(ord("A") + byte % 26) for byte in digest[:6])


def to_unicode_cmap(chars: str) -> bytes:
    """A ToUnicode CMap (ISO 32000-1, 9.10.3) mapping each character's WinAnsi code to it."""
    pairs = sorted((char.encode(STAMP_ENCODING)[0], char) for char in chars)
    lines = [b"/CIDInit /ProcSet findresource begin", b"12 dict begin", b"begincmap",
             b"/CIDSystemInfo << /Registry (Adobe) /Ordering (UCS) /Supplement 0 >> def",
             b"/CMapName /Adobe-Identity-UCS def", b"/CMapType 2 def",
             b"1 begincodespacerange", b"<00> <FF>", b"endcodespacerange"]
    for start in range(0, len(pairs), 100):  # at most 100 entries per block (9.10.3)
        block = pairs[start:start + 100]
        lines.append(b"%d beginbfchar" % len(block))
        lines += [b"<%02X> <%s>" % (code, char.encode("utf-16-be").hex().upper().encode())
                  for code, char in block]
        lines.append(b"endbfchar")
    lines += [b"endcmap", b"CMapName currentdict /CMap defineresource pop", b"end", b"end"]
    return b"\n".join(lines) + b"\n"


def _embedded_font(pdf: Pdf, font_path: Path, chars: str) -> StampFont:
    font = TTFont(font_path, recalcTimestamp=False)  # keep the output reproducible
    units_per_em = font["head"].unitsPerEm
    cmap = font.getBestCmap()
    missing = [char for char in chars if ord(char) not in cmap and char != " "]
    if missing:
        raise ValueError(f"{font_path.name} has no glyph for {missing!r}")
    advance_em = {char: font["hmtx"][cmap[ord(char)]][0] / units_per_em
                  for char in chars if ord(char) in cmap}
    options = subset.Options()
    options.layout_features = []
    options.name_IDs = ["*"]
    options.notdef_outline = True
    options.drop_tables += ["FFTM"]  # FontForge timestamps: not needed, not subsettable
    subsetter = subset.Subsetter(options)
    subsetter.populate(unicodes=[ord(char) for char in chars])
    subsetter.subset(font)
    buffer = io.BytesIO()
    font.save(buffer)
    file_stream = pdf.make_stream(buffer.getvalue(), Length1=len(buffer.getvalue()))

    head = font["head"]
    scale = 1000 / units_per_em
    base_font = Name(f"/{_subset_tag(chars)}+DejaVuSans")
    descriptor = Dictionary(
        Type=Name.FontDescriptor,
        FontName=base_font,
        Flags=32,  # nonsymbolic
        FontBBox=Array([round(value * scale)
                        for value in (head.xMin, head.yMin, head.xMax, head.yMax)]),
        ItalicAngle=0,
        Ascent=round(font["hhea"].ascent * scale),
        Descent=round(font["hhea"].descent * scale),
        CapHeight=round(CAP_HEIGHT_EM * 1000),
        StemV=80,
        FontFile2=file_stream,
    )
    codes = [char.encode(STAMP_ENCODING)[0] for char in chars]
    first, last = min(codes), max(codes)
    widths = [0] * (last - first + 1)
    for char, code in zip(chars, codes):
        widths[code - first] = round(advance_em.get(char, 0) * 1000)
    font_dict = Dictionary(
        Type=Name.Font,
        Subtype=Name.TrueType,
        BaseFont=base_font,
        FirstChar=first,
        LastChar=last,
        Widths=Array(widths),
        Encoding=Name.WinAnsiEncoding,
        FontDescriptor=pdf.make_indirect(descriptor),
        ToUnicode=pdf.make_stream(to_unicode_cmap(chars)),
    )
    return StampFont(pdf.make_indirect(font_dict), advance_em, embedded=True)


def make_stamp_font(pdf: Pdf, texts: Iterable[str]) -> StampFont:
    """Add the stamp font for ``texts`` to ``pdf``: DejaVu Sans, subset and embedded.

    Raises :class:`~reportgen.errors.ReportgenError` when the font is not installed.
    """
    chars = check_label_text(texts)
    font_path = find_dejavu_sans()
    if font_path is None:
        raise ReportgenError(
            "the page-number stamp of report.pdf needs the font DejaVu Sans, which was not "
            f"found; {FONT_PACKAGE_HINT}")
    return _embedded_font(pdf, font_path, chars)


def _pdf_string(text: str) -> bytes:
    raw = text.encode(STAMP_ENCODING)
    return b"(" + raw.replace(b"\\", b"\\\\").replace(b"(", b"\\(").replace(b")", b"\\)") + b")"


def stamp_operators(text: str, frame: PageFrame, font: StampFont) -> bytes:
    """Content-stream operators that draw ``text`` right-aligned in the bottom margin."""
    size_pt = STAMP_FONT_SIZE_PT
    right_pt = frame.width_pt - frame.right_margin_pt
    x_pt = right_pt - font.width_pt(text, size_pt)
    baseline_pt = max(frame.bottom_margin_pt / 2 - CAP_HEIGHT_EM * size_pt / 2, 2.0)
    return b"Q q /Artifact BMC 0 g BT %s %.1f Tf 1 0 0 1 %.2f %.2f Tm %s Tj ET EMC Q" % (
        STAMP_FONT_RESOURCE.encode(), size_pt, x_pt, baseline_pt, _pdf_string(text))


def slot_operators(slot: PageSlot, text: str, font: StampFont) -> bytes:
    """Content-stream operators that write ``text`` on the baseline of ``slot``."""
    width_pt = font.width_pt(text, slot.size_pt)
    x_pt = slot.left_pt if slot.flush_left else slot.right_pt - width_pt
    red, green, blue = slot.rgb
    return b"BT %.3f %.3f %.3f rg %s %.2f Tf 1 0 0 1 %.2f %.2f Tm %s Tj ET" % (
        red, green, blue, STAMP_FONT_RESOURCE.encode(), slot.size_pt, x_pt, slot.baseline_pt,
        _pdf_string(text))


class Stamper:
    """Appends page-number streams to pages of one file, sharing the font and ``q``."""

    def __init__(self, pdf: Pdf, font: StampFont) -> None:
        self.pdf = pdf
        self.font = font
        self.save_reference = pdf.make_stream(b"q\n")

    def stamp(self, page: Dictionary, text: str, frame: PageFrame,
              slot_texts: Sequence[tuple[PageSlot, str]] = ()) -> None:
        """Wrap the page's content in ``q … Q``; draw ``text`` and the slots' texts after it."""
        operators = []
        if slot_texts:  # first: text extraction then reads them before the page label
            operators.append(b"Q q /Artifact BMC " + b" ".join(
                slot_operators(slot, slot_text, self.font) for slot, slot_text in slot_texts)
                + b" EMC")
        operators.append(stamp_operators(text, frame, self.font))
        stream = self.pdf.make_stream(b"\n" + b"\n".join(operators) + b"\n")
        contents = page.get("/Contents")
        if contents is None:
            originals: list[Object] = []
        elif isinstance(contents, Array):
            originals = list(contents)
        else:
            originals = [contents]
        page[Name.Contents] = Array([self.save_reference, *originals, stream])
        resources = page.get("/Resources")
        if not isinstance(resources, Dictionary):
            resources = Dictionary()
            page[Name.Resources] = resources
            resources = page[Name.Resources]
        fonts = resources.get("/Font")
        if not isinstance(fonts, Dictionary):
            resources[Name.Font] = Dictionary()
            fonts = resources[Name.Font]
        fonts[Name(STAMP_FONT_RESOURCE)] = self.font.reference
