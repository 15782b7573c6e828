"""Atomic writing of the output folder.

Every output is first written completely to a hidden temporary file in the output
folder, flushed to disk, and only then renamed over its target (``os.replace``), so
an interrupted build leaves the previous outputs whole and readable and never a
half-written file.
"""
from __future__ import annotations

import os
import tempfile
import shutil
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import BinaryIO, Final, Union

OUTPUT_NAMES: Final = ("report.html", "report.pdf", "results.csv", "summary.json")
TEMP_PREFIX: Final = ".reportgen-partial-"
# An output: its bytes, or an open file holding them (read from its start; a large
# report.html is made into a temporary file rather than held in memory).
Output = Union[bytes, BinaryIO]


def write_outputs(out_dir: Path, outputs: Mapping[str, Output],
                  ours: Sequence[str] = OUTPUT_NAMES,
                  before_replacing: Callable[[], None] = lambda: None) -> None:
    """Write all outputs, each atomically; called only after everything is rendered.

    Outputs of ours (``ours``: a build's four files unless told otherwise) that this run
    does not produce are removed so that no stale file sits beside new ones; leftovers of
    an interrupted earlier run (hidden temporary files) are cleaned up.
    ``before_replacing()`` is called once every output is staged, before the first
    previous file is replaced or removed: what it raises leaves the folder as it was.
    """
    out_dir.mkdir(parents=True, exist_ok=True)
    for leftover in out_dir.glob(f"{TEMP_PREFIX}*"):
        leftover.unlink(missing_ok=True)
    staged: list[tuple[str, Path]] = []
    try:
        for name, data in outputs.items():
            staged.append((name, _stage(out_dir, name, data)))
        before_replacing()
        for name in ours:
            if name not in outputs:
                (out_dir / name).unlink(missing_ok=True)
        for name, temp in staged:
            os.replace(temp, out_dir / name)
    finally:
        for _, temp in staged:
            temp.unlink(missing_ok=True)
    _fsync_dir(out_dir)


def _stage(out_dir: Path, name: str, data: Output) -> Path:
    fd, temp_name = tempfile.mkstemp(prefix=f"{TEMP_PREFIX}{name}.", dir=out_dir)
    temp = Path(temp_name)
    try:
        with os.fdopen(fd, "wb") as handle:
            if isinstance(data, bytes):
                handle.write(data)
            else:
                data.seek(0)
                shutil.copyfileobj(data, handle, 1 << 20)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(temp, 0o644)
    except BaseException:
        temp.unlink(missing_ok=True)
        raise
    return temp


def _fsync_dir(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_files(out_dir: Path, outputs: Mapping[str, bytes]) -> None:
    """Write each of ``outputs`` (names of files in ``out_dir``) atomically, leaving every other
    file of the folder alone (``reportgen import --write``)."""
    out_dir.mkdir(parents=True, exist_ok=True)
    staged: list[tuple[str, Path]] = []
    try:
        for name, data in outputs.items():
            staged.append((name, _stage(out_dir, name, data)))
        for name, temp in staged:
            os.replace(temp, out_dir / name)
    finally:
        for _, temp in staged:
            temp.unlink(missing_ok=True)
    _fsync_dir(out_dir)
