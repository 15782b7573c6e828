"""The fork server the PDF's worker processes are started from.

Kept apart from :mod:`reportgen.pdf.engine` so that the server can be started at the
very beginning of a build without importing WeasyPrint here: it imports the engine
(and so WeasyPrint and its fonts) in its own process, while this one loads and judges
the project, so the first part can be sent to a worker at once (about half a second
off a rebuild that renders only a few parts).
"""
from __future__ import annotations

import multiprocessing
import multiprocessing.forkserver
from multiprocessing.context import BaseContext
from typing import Final

# Each worker forked from the server runs the main script again, as multiprocessing does
# for every child (Python 3.11 cannot preload it: the server is not told its path). The
# `reportgen` command's script only imports reportgen.cli: preloaded here, that costs a
# worker nothing, where it took a third of a second of each part's time before.
PRELOAD: Final = ("reportgen.pdf.engine", "reportgen.cli")


def worker_context() -> BaseContext:
    """The multiprocessing context of the PDF workers (fork server, engine preloaded)."""
    context = multiprocessing.get_context("forkserver")
    context.set_forkserver_preload(list(PRELOAD))
    return context


def start_early() -> None:
    """Start the fork server now (it returns at once; the server imports in the background)."""
    worker_context()
    multiprocessing.forkserver.ensure_running()
