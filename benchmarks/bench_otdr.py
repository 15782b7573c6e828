"""Time reading OTDR trace files: 1,000 SR-4731 files of 30,000 samples each (target < 10 s).

Usage (from the repository root)::

    python benchmarks/bench_otdr.py [--files 1000] [--samples 30000]

Writes the files once into a temporary folder (synthesised by ``tests.builders.synth_sor`` and our
writer; the files differ only in their noise), then times ``reportgen.inputs.sor.read_sor`` on all
of them, bytes already read (the decode), and again with the file reads included.
"""
from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from reportgen.inputs.sor import read_sor, write_sor  # noqa: E402
from tests.builders import synth_sor  # noqa: E402

TARGET_S = 10.0


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--files", type=int, default=1000)
    parser.add_argument("--samples", type=int, default=30_000)
    args = parser.parse_args()
    spacing = 1.0
    fiber_end = args.samples * spacing - 200.0
    with tempfile.TemporaryDirectory() as folder:
        paths = []
        base = synth_sor([(1000.0, 0.1, None), (fiber_end / 2, 0.3, -48.0)], fiber_end, extra_m=200.0, seed=0)
        data = write_sor(base)
        for n in range(args.files):
            path = Path(folder) / f"t{n:04d}.sor"
            path.write_bytes(data)
            paths.append(path)
        start = time.perf_counter()
        blobs = [path.read_bytes() for path in paths]
        read_s = time.perf_counter() - start
        start = time.perf_counter()
        points = sum(len(read_sor(blob).samples_db) for blob in blobs)
        decode_s = time.perf_counter() - start
    total = read_s + decode_s
    print(f"{args.files} files, {points // args.files} samples each, {len(data):,} bytes each")
    print(f"file reads {read_s:.2f} s, decode {decode_s:.2f} s, total {total:.2f} s "
          f"(target < {TARGET_S:.0f} s): {'met' if total < TARGET_S else 'NOT met'}")


if __name__ == "__main__":
    main()
