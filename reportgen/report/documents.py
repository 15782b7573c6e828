"""The report's HTML documents as the builder hands them on: squeezed, in pieces, on demand.

:func:`squeeze_html` drops the blank text between block-level tags that the PDF engine would
parse and box for nothing; :func:`squeezed_pieces` does the same to a document made in pieces
(report.html, written without holding the whole text); :class:`LazyDocuments` renders the PDF
parts' documents when read and keeps only the last few.
"""
from __future__ import annotations

import re
from collections.abc import Callable, Iterable, Iterator, Sequence
from typing import Final, overload

KEEP_DOCUMENTS: Final = 8  # PDF part documents kept after they were read (LazyDocuments)
# report.html is written in pieces of about this many characters (ReportDocument.write_html)
HTML_PIECE_CHARS: Final = 1 << 20

# Blank text between two block-level or table tags renders nothing, yet every run of it
# is parsed and boxed by the PDF engine; squeezing it out makes each part cheaper.
_BLOCK_TAGS: Final = ("html|head|body|main|section|header|footer|div|figure|figcaption|table|thead|"
                      "tbody|tfoot|tr|td|th|colgroup|col|ul|ol|li|dl|dt|dd|h[1-6]|p|style|meta|title|svg")
_BETWEEN_BLOCKS: Final = re.compile(rf"(</?(?:{_BLOCK_TAGS})\b[^<>]*>)\s+(?=</?(?:{_BLOCK_TAGS})\b)")


def squeeze_html(html: str) -> str:
    """``html`` without the blank text between block-level tags (which renders nothing)."""
    return _BETWEEN_BLOCKS.sub(r"\1", html)


def squeezed_pieces(chunks: Iterable[str], size: int = HTML_PIECE_CHARS) -> Iterator[str]:
    """The text of ``chunks`` joined, :func:`squeeze_html` applied, in pieces of about
    ``size`` characters; joined, the pieces equal ``squeeze_html("".join(chunks))``.

    A piece ends just before a ``<`` that follows a character other than blank space:
    no squeezed match can span that cut (a match is a tag, blank space and the ``<`` of
    the next tag, which therefore follows a blank), nor look past it.
    """
    buffer: list[str] = []
    held = 0
    for chunk in chunks:
        buffer.append(chunk)
        held += len(chunk)
        if held < size:
            continue
        text = "".join(buffer)
        cut = _last_safe_cut(text)
        if cut <= 0:
            buffer, held = [text], len(text)
            continue
        yield squeeze_html(text[:cut])
        buffer, held = [text[cut:]], len(text) - cut
    if buffer:
        yield squeeze_html("".join(buffer))


def _last_safe_cut(text: str) -> int:
    """The last index of a ``<`` in ``text`` not preceded by blank space (0: none)."""
    position = text.rfind("<")
    while position > 0 and text[position - 1].isspace():
        position = text.rfind("<", 0, position)
    return max(position, 0)


class LazyDocuments(Sequence[str]):
    """Documents rendered when read: the PDF engine sends the first parts to its workers
    while the later ones are still to be rendered.

    Only the ``keep`` documents read last are kept (the engine reads a part two or three
    times in a row: for its cache key, ahead of time, to send it); one read again later
    is rendered again, which gives the same text (rendering is a pure function of the
    view). Keeping every part made the HTML of a 20,000-link report (277 MB of text)
    stay in memory for the whole build.
    """

    def __init__(self, makers: Sequence[Callable[[], str]], keep: int = KEEP_DOCUMENTS) -> None:
        self._makers = tuple(makers)
        self._keep = keep
        self._done: dict[int, str] = {}

    def __len__(self) -> int:
        return len(self._makers)

    @overload
    def __getitem__(self, index: int) -> str: ...
    @overload
    def __getitem__(self, index: slice) -> list[str]: ...

    def __getitem__(self, index: int | slice) -> str | list[str]:
        if isinstance(index, slice):
            return [self[position] for position in range(len(self))[index]]
        position = range(len(self))[index]  # IndexError and negative indices as for a tuple
        text = self._done.pop(position, None)
        if text is None:
            text = self._makers[position]()
        self._done[position] = text  # last read last: the dict's order is the recency
        while len(self._done) > self._keep:
            del self._done[next(iter(self._done))]
        return text
