"""Write the demo project's OTDR trace files (demo_project/otdr/*.sor) from a physical model.

Usage (from the repository root)::

    python benchmarks/make_otdr_demo.py [OUT_DIR]   # default demo_project/otdr

Every trace is synthesised by ``tests.builders.synth_sor`` (backscatter slope, splice and
connector steps, Fresnel peaks, noise) and written by our own SR-4731 writer. The links, their
cords and event positions are the demo's invented outside-plant runs; the same command always
writes the same bytes (seeded noise, fixed dates).
"""
from __future__ import annotations

import random
import sys
from datetime import datetime, timezone
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from reportgen.inputs.sor import write_sor  # noqa: E402
from tests.builders import synth_sor  # noqa: E402

CORD_M = 150.0  # launch and receive cords (testing.otdr in demo_project/project.yaml)
ALPHA = {1310: 0.34, 1550: 0.21}  # dB/km, typical G.652 cabled fiber (common practice)
# link id, fiber length [m] (the length the loss-test set measured in results/day2-campus.csv;
# links.csv documents the cable), ends, positions of inner connections and splices along the link
LINKS = {
    "CB-01": (463.0, "A-ER ODF1 tray 1, ports 1-4", "B-ER science building, ODF1 ports 1-4", [], [210.0]),
    "CB-03": (833.0, "A-ER ODF1 tray 1, ports 7-10", "D-ER sports hall, ODF1 ports 1-4", [], [260.0, 585.0]),
    "CB-07": (2472.0, "A-ER ODF1 tray 2, ports 5-6", "G-OB hill observatory, wall ODF", [1240.0],
              [410.0, 980.0, 1710.0, 2105.0]),
}
WHEN = datetime(2026, 4, 17, 9, 0, tzinfo=timezone.utc)


def traces(link_id: str, length: float, end_a: str, end_b: str, connections: list[float],
           splices: list[float], rng: random.Random):
    fiber_end = length + 2 * CORD_M
    events = []  # along the link from A: (position, true loss, reflectance or None, backscatter step)
    for position in [0.0, *connections, length]:
        events.append((position, round(rng.uniform(0.32, 0.44), 3), round(rng.uniform(-55.0, -47.0), 1), 0.0))
    for position in splices:
        events.append((position, round(rng.uniform(0.02, 0.10), 3), None, round(rng.uniform(-0.07, 0.07), 3)))
    link_loss = sum(loss for _p, loss, _r, _s in events)
    for wavelength in (1310, 1550):
        for direction, origin, terminus in (("ab", end_a, end_b), ("ba", end_b, end_a)):
            one_way = []
            for position, loss, refl, step in events:
                seen = position if direction == "ab" else length - position
                shift = step if direction == "ab" else -step  # backscatter difference: gain one way
                one_way.append((seen + CORD_M, round(loss + shift, 3), refl))
            seed = rng.randrange(1 << 30)
            sor = synth_sor(sorted(one_way), fiber_end, alpha_db_per_km=ALPHA[wavelength], noise_db=0.01,
                            seed=seed, pulse_ns=30, spacing_m=1.0, extra_m=200.0,
                            cable_id=link_id, fiber_id="1", origin=origin, terminus=terminus,
                            nominal_wavelength_nm=wavelength, wavelength_nm=float(wavelength),
                            operator="S. Marrowby", supplier="Demo instrument (fictional)",
                            mainframe="OT-D1", mainframe_serial="D-0042", software="1.0",
                            comment="invented demo trace", timestamp=int(WHEN.timestamp()),
                            averages=4096, cable_code="OS2 12F loose tube",
                            # the instrument's end-to-end loss: the link between the cords
                            total_loss_db=round(link_loss + ALPHA[wavelength] * length / 1000, 3))
            yield f"{link_id}-s1-{wavelength}-{direction}.sor", write_sor(sor)


def main(out_dir: Path) -> None:
    out_dir.mkdir(parents=True, exist_ok=True)
    rng = random.Random(13)
    for link_id, (length, end_a, end_b, connections, splices) in LINKS.items():
        for name, data in traces(link_id, length, end_a, end_b, connections, splices, rng):
            (out_dir / name).write_bytes(data)
            print(f"{out_dir / name}: {len(data)} bytes")


if __name__ == "__main__":
    main(Path(sys.argv[1]) if len(sys.argv) > 1 else Path("demo_project/otdr"))
