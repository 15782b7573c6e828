"""Write a synthetic project folder for the benchmarks.

Usage::

    python benchmarks/make_synthetic.py OUT_DIR --links N [--seed S]

The folder holds ``project.yaml``, ``links.csv`` and ``results/`` split into four batch files
plus ``retests.csv``. Links are a mix of OM4 inside plant (60 %) and OS2 outside plant (40 %),
each with 2 strands tested at the two wavelengths of its category in both directions, so every
link has 8 required results and the folder holds exactly ``8 * N`` result rows
(12,500 links = 100,000 results). About 1 % of the links each:

- fail (one strand with a bad connection, never retested);
- carry a retest: a first reading that fails or is negative (bad reference) superseded by a
  later passing one in ``results/retests.csv``;
- miss one required result (incomplete).

The retest rows and the missing rows are equal in number, which keeps the total at 8 * N.
The same arguments always give byte-identical files. Losses come from a plain physical model
(fiber attenuation plus random connection and splice losses) and stay well inside the
tia-568.3-d limits unless a link was picked for one of the situations above.

Importable: ``make_project(out_dir, links, seed=1) -> Path``.
"""
from __future__ import annotations

import argparse
import csv
import random
import sys
from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path
from typing import Final

MARKER: Final = "# Synthetic project written by benchmarks/make_synthetic.py"
BATCHES: Final = 4
SECONDS_PER_RESULT: Final = 30
DAY_START_H: Final = 7
DAY_LENGTH_S: Final = 10 * 3600
FIRST_DAY: Final = datetime(2026, 1, 5)
WAVELENGTHS_NM: Final = {"OM4": (850, 1300), "OS2": (1310, 1550)}
DIRECTIONS: Final = ("ab", "ba")
STRANDS: Final = 2
# Plausible installed values (common practice), not limits: fiber attenuation [dB/km]
# ranges per wavelength and the range of one mated connection or splice [dB].
FIBER_DB_PER_KM: Final = {850: (2.3, 2.8), 1300: (0.6, 0.9), 1310: (0.32, 0.38), 1550: (0.19, 0.24)}
CONNECTION_DB: Final = (0.2, 0.45)
SPLICE_DB: Final = (0.02, 0.12)
BAD_CONNECTION_DB: Final = 4.0  # extra loss of a broken connection: fails at any length here

PROJECT_YAML: Final = """{marker}
# Invented data for speed tests; no real place, company or person.
project:
  title: Synthetic benchmark project ({links} links, seed {seed})
  site: Nowhere campus (synthetic)
  contractor:
    name: Synthetic Test Crew (synthetic)
testing:
  limits: tia-568.3-d
  reference_method: one-cord
  directions: both
  uncertainty_db: 0.2
  units: m
instruments:
  - {{id: SRC-1, kind: light-source, model: SYN-LS, serial: "0001", calibration_due: 2027-01-01}}
  - {{id: OPM-1, kind: power-meter, model: SYN-PM, serial: "0002", calibration_due: 2027-01-01}}
technicians: [A. Synthetic, B. Synthetic]
"""

LINK_COLUMNS: Final = ("link_id", "end_a", "end_b", "fiber_type", "plant", "length_m", "strands",
                       "connections", "splices")
RESULT_COLUMNS: Final = ("link_id", "strand", "wavelength_nm", "direction", "loss_db",
                         "tested_at", "instrument", "technician")


@dataclass(frozen=True)
class SyntheticLink:
    link_id: str
    fiber_type: str
    length_m: int
    connections: int
    splices: int

    @property
    def plant(self) -> str:
        return "outside" if self.fiber_type == "OS2" else "inside"


def make_links(count: int, rng: random.Random) -> list[SyntheticLink]:
    """``count`` links, 60 % OM4 inside plant (20-300 m), 40 % OS2 outside (0.3-2.5 km)."""
    width = max(5, len(str(count)))
    links = []
    for index in range(1, count + 1):
        if rng.random() < 0.6:
            link = SyntheticLink(f"SYN-{index:0{width}d}", "OM4", rng.randint(20, 300),
                                 rng.choice((0, 0, 0, 1, 2)), 0)
        else:
            link = SyntheticLink(f"SYN-{index:0{width}d}", "OS2", rng.randint(300, 2500),
                                 rng.choice((0, 0, 1)), rng.randint(1, 4))
        links.append(link)
    return links


def strand_losses_db(link: SyntheticLink, rng: random.Random) -> dict[int, float]:
    """Loss of one strand per wavelength [dB]: fiber + connections (ends included) + splices."""
    connections_db = sum(rng.uniform(*CONNECTION_DB) for _ in range(link.connections + 2))
    splices_db = sum(rng.uniform(*SPLICE_DB) for _ in range(link.splices))
    return {
        wavelength_nm: rng.uniform(*FIBER_DB_PER_KM[wavelength_nm]) * link.length_m / 1000.0
        + connections_db + splices_db
        for wavelength_nm in WAVELENGTHS_NM[link.fiber_type]
    }


def pick_situations(count: int, rng: random.Random) -> tuple[set[int], set[int], set[int]]:
    """Indexes of links that fail, carry a retest, and miss a result (about 1 % each)."""
    per_kind = 0 if count < 4 else max(1, count // 100)
    chosen = rng.sample(range(count), 3 * per_kind)
    return (set(chosen[:per_kind]), set(chosen[per_kind:2 * per_kind]),
            set(chosen[2 * per_kind:]))


def make_project(out_dir: Path, links: int, seed: int = 1) -> Path:
    """Write a synthetic project folder with ``links`` links; returns ``out_dir``.

    Refuses (FileExistsError) a non-empty folder that this function did not write before.
    """
    if links < 1:
        raise ValueError(f"links must be at least 1, got {links}")
    out_dir = Path(out_dir)
    _prepare_folder(out_dir)
    rng = random.Random(seed)
    all_links = make_links(links, rng)
    failing, retested, incomplete = pick_situations(links, rng)
    batches: list[list[list[object]]] = [[] for _ in range(BATCHES)]
    retests: list[list[object]] = []
    clock = _Clock()
    for index, link in enumerate(all_links):
        batch = batches[index * BATCHES // links]
        technician = ("A. Synthetic", "B. Synthetic")[index % 2]
        rows = _link_rows(link, rng, clock, technician, bad_strand=2 if index in failing else None)
        if index in incomplete:
            del rows[rng.randrange(len(rows))]
        if index in retested:
            row = rows[rng.randrange(len(rows))]
            retests.append([*row[:5], "", "SRC-1;OPM-1", technician])
            row[4] = "-0.35" if index % 2 else f"{float(row[4]) + BAD_CONNECTION_DB:.2f}"
        batch.extend(rows)
    clock.next_day()
    for row in retests:
        row[5] = clock.tick()
    _write_csv(out_dir / "links.csv", LINK_COLUMNS, (
        [link.link_id, f"{link.link_id} end A", f"{link.link_id} end B", link.fiber_type,
         link.plant, link.length_m, STRANDS, link.connections, link.splices]
        for link in all_links))
    for number, rows in enumerate(batches, start=1):
        _write_csv(out_dir / "results" / f"batch-{number}.csv", RESULT_COLUMNS, rows)
    _write_csv(out_dir / "results" / "retests.csv", RESULT_COLUMNS, retests)
    (out_dir / "project.yaml").write_text(PROJECT_YAML.format(marker=MARKER, links=links, seed=seed),
                                          encoding="utf-8")
    return out_dir


def _link_rows(link: SyntheticLink, rng: random.Random, clock: _Clock, technician: str,
               bad_strand: int | None) -> list[list[object]]:
    rows = []
    for strand in range(1, STRANDS + 1):
        losses_db = strand_losses_db(link, rng)
        extra_db = BAD_CONNECTION_DB if strand == bad_strand else 0.0
        for direction in DIRECTIONS:
            for wavelength_nm, loss_db in losses_db.items():
                measured_db = max(0.02, loss_db + extra_db + rng.gauss(0.0, 0.025))
                rows.append([link.link_id, strand, wavelength_nm, direction, f"{measured_db:.2f}",
                             clock.tick(), "SRC-1;OPM-1", technician])
    return rows


class _Clock:
    """Test times: one result every 30 s, working days 07:00-17:00, one after another."""

    def __init__(self) -> None:
        self.day = FIRST_DAY
        self.seconds = 0

    def tick(self) -> str:
        if self.seconds >= DAY_LENGTH_S:
            self.next_day()
        stamp = self.day + timedelta(hours=DAY_START_H, seconds=self.seconds)
        self.seconds += SECONDS_PER_RESULT
        return stamp.isoformat(timespec="seconds")

    def next_day(self) -> None:
        self.day += timedelta(days=1)
        self.seconds = 0


def _prepare_folder(out_dir: Path) -> None:
    project_yaml = out_dir / "project.yaml"
    if out_dir.exists() and any(out_dir.iterdir()):
        ours = project_yaml.is_file() and project_yaml.read_text(
            encoding="utf-8").startswith(MARKER)
        if not ours:
            raise FileExistsError(f"{out_dir} is not empty and was not written by "
                                  f"make_synthetic.py; choose a new or empty folder")
        for old in (out_dir / "results").glob("*.csv"):
            old.unlink()
    (out_dir / "results").mkdir(parents=True, exist_ok=True)


def _write_csv(path: Path, header: tuple[str, ...], rows) -> None:
    with path.open("w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Write a synthetic reportgen project folder.")
    parser.add_argument("out_dir", type=Path, metavar="OUT_DIR")
    parser.add_argument("--links", type=int, required=True, metavar="N",
                        help="number of links (8 results each)")
    parser.add_argument("--seed", type=int, default=1, metavar="S", help="random seed (default 1)")
    args = parser.parse_args(argv)
    try:
        make_project(args.out_dir, args.links, args.seed)
    except (FileExistsError, ValueError, OSError) as error:
        print(f"make_synthetic.py: {error}", file=sys.stderr)
        return 2
    print(f"wrote {args.out_dir} ({args.links} links, {8 * args.links} results, seed {args.seed})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
