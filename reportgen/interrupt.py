"""Ctrl-C during a build stops it, whatever Python was running when the signal came.

Python turns SIGINT into :class:`KeyboardInterrupt` in the main thread at the next
bytecode it runs, and two places lose it (both seen in builds interrupted early, while
WeasyPrint is being imported):

- a finalizer or callback (an abandoned generator being closed, a ``__del__`` method,
  the import system's weakref callback for its module locks): the exception is printed
  as "Exception ignored" and dropped, and the build went on and replaced the outputs;
- code run from a string by ``eval``/``exec`` (cssselect2 and fontTools do so while
  they are imported): CPython 3.11 then remembers an "unhandled" interrupt even when
  the exception is caught further up, and ends the process with SIGINT (exit status
  -2) instead of the build's status 2.

So while a build runs, SIGINT is handled here: the request is recorded first; inside
the import system or code run from a string nothing is raised; elsewhere
:class:`KeyboardInterrupt` is raised at once. The build calls :func:`check` at its
checkpoints (between steps, at each turn of the loop that sends and collects the PDF
parts, and after the outputs are staged, before any of them replaces a previous one),
which raises if the request was recorded.

A handler is installed only in the main thread and only over Python's default one: a
program embedding reportgen that handles SIGINT itself (or ignores it) keeps its own.
"""
from __future__ import annotations

import signal
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from types import FrameType
from typing import Final

_requested = threading.Event()


# Frames in which a KeyboardInterrupt would be lost (see above): the import system's
# and code compiled from a string.
_FRAGILE_FILES: Final = ("<string>",)
_FRAGILE_PREFIXES: Final = ("<frozen importlib.",)


def fragile(frame: FrameType | None) -> bool:
    """Whether ``frame`` or a frame that called it is one a KeyboardInterrupt raised in
    it would be lost or misreported from."""
    while frame is not None:
        name = frame.f_code.co_filename
        if name in _FRAGILE_FILES or name.startswith(_FRAGILE_PREFIXES):
            return True
        frame = frame.f_back
    return False


def _on_sigint(signum: int, frame: FrameType | None) -> None:
    _requested.set()
    if not fragile(frame):
        raise KeyboardInterrupt
    # else raised by the build's next check()


@contextmanager
def watching() -> Iterator[None]:
    """Record Ctrl-C (SIGINT) for :func:`check` while the block runs; the record ends with
    the block (a Ctrl-C that stopped one build does not stop the next)."""
    _requested.clear()
    install = (threading.current_thread() is threading.main_thread()
               and signal.getsignal(signal.SIGINT) is signal.default_int_handler)
    if install:
        signal.signal(signal.SIGINT, _on_sigint)
    try:
        yield
    finally:
        if install:
            signal.signal(signal.SIGINT, signal.default_int_handler)
        _requested.clear()


def requested() -> bool:
    """Whether SIGINT came since the build began (even if its exception was lost); False
    outside a build."""
    return _requested.is_set()


def check() -> None:
    """Raise :class:`KeyboardInterrupt` if SIGINT came since the build began."""
    if _requested.is_set():
        raise KeyboardInterrupt
