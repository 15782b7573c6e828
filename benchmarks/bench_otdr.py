"""Time reading OTDR trace files: 1,000 SR-4731 files of 30,000 samples each (target < 10 s).

Usage (from the repository root)::

    python benchmarks/bench_otdr.py [--files 1000] [--samples 30000]
    python benchmarks/bench_otdr.py --report 500     # build with and without traces (target < 1.5x)
    python benchmarks/bench_otdr.py --report 100 --rounds 2 --keep /tmp/otdr-bench

Writes the files once into a temporary folder (synthesised by ``tests.builders.synth_sor`` and our
writer; the files differ only in their noise), then times ``reportgen.inputs.sor.read_sor`` on all
of them, bytes already read (the decode), and again with the file reads included.

``--report N`` writes a synthetic project of N links (``benchmarks/make_synthetic.py``), and a copy
with two traces per strand (a→b and b→a at the first wavelength of the link's fiber category,
matched by ``otdr/index.csv``) that agree with what the link declares (cords, connections, splices,
length, insertion loss: see ``_write_projects``), and times the full build (``reportgen.pipeline.build``, HTML and
PDF) of each: wall time, target under 1.5 times the build without traces. ``--rounds R`` builds
each project R times, alternating (without, with, without, with...), each into a fresh output
folder without the part cache, so load from other work on a shared machine falls on both; each
round's ratio is printed, and the load average before each build; also the CPU time of the
build and all its processes (:func:`tree_cpu_s`), which other work on a shared machine
disturbs far less than the wall time. A 5-link build runs first,
untimed, so the first timed build does not pay for imports and font loading. ``--keep DIR`` writes the two
projects into DIR (reused when already there) instead of a temporary folder.
"""
from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from reportgen.inputs.sor import read_sor, write_sor  # noqa: E402
from tests.builders import synth_sor  # noqa: E402

TARGET_S = 10.0
CORD_M = 150.0  # launch and receive cords of the traced copy
# fiber attenuation of the traces [dB/km]: mid-range of make_synthetic's FIBER_DB_PER_KM
ALPHA_DB_PER_KM = {850: 2.55, 1310: 0.35}
OTDR_YAML = f"""  otdr:
    launch_cord_m: {CORD_M:g}
    receive_cord_m: {CORD_M:g}
"""


def report_comparison(links: int, rounds: int = 1, keep: Path | None = None) -> None:
    import contextlib

    with contextlib.ExitStack() as stack:
        folder = keep if keep is not None else Path(stack.enter_context(tempfile.TemporaryDirectory()))
        folder.mkdir(parents=True, exist_ok=True)
        plain, traced = folder / f"plain-{links}", folder / f"traced-{links}"
        if not (traced / "otdr" / "index.csv").exists():
            _write_projects(plain, traced, links)
        from benchmarks.make_synthetic import make_project
        from reportgen.pipeline import build

        warmup = folder / "warmup"
        if not warmup.exists():
            make_project(warmup, 5)
        build(warmup, folder / "out-warmup", cache=False)  # imports, fonts: not timed
        for round_no in range(1, rounds + 1):
            times, cpu = {}, {}
            for name, project in (("without traces", plain), ("with traces", traced)):
                load = os.getloadavg()[0]
                out = folder / f"out-{links}-{name.replace(' ', '-')}-{round_no}"
                start, start_cpu = time.perf_counter(), tree_cpu_s()
                build(project, out, cache=False)
                times[name] = time.perf_counter() - start
                cpu[name] = tree_cpu_s() - start_cpu
                print(f"round {round_no}: {links} links {name}: {times[name]:.1f} s wall, "
                      f"{cpu[name]:.1f} s CPU (load average before {load:.1f})", flush=True)
            ratio = times["with traces"] / times["without traces"]
            print(f"round {round_no}: ratio {ratio:.2f} wall (target < 1.5): "
                  f"{'met' if ratio < 1.5 else 'NOT met'}; CPU ratio "
                  f"{cpu['with traces'] / cpu['without traces']:.2f}", flush=True)


def tree_cpu_s() -> float:
    """CPU time (user + system) of this process and all its descendants, living or reaped [s].

    The render workers are forked by a fork server (a child of this process) and reaped by
    it: their time is in the fork server's children times, or their own while they live.
    """
    import resource

    ticks = os.sysconf("SC_CLK_TCK")
    children: dict[int, list[int]] = {}
    stats: dict[int, list[str]] = {}
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                fields = Path(f"/proc/{entry}/stat").read_text().rsplit(")", 1)[1].split()
            except OSError:
                continue
            stats[int(entry)] = fields
            children.setdefault(int(fields[1]), []).append(int(entry))
    total = 0.0
    stack = list(children.get(os.getpid(), []))
    while stack:
        pid = stack.pop()
        fields = stats[pid]  # utime, stime, cutime, cstime are fields 14-17 of stat
        total += sum(int(value) for value in fields[11:15]) / ticks
        stack.extend(children.get(pid, []))
    own = resource.getrusage(resource.RUSAGE_SELF)
    reaped = resource.getrusage(resource.RUSAGE_CHILDREN)
    return total + own.ru_utime + own.ru_stime + reaped.ru_utime + reaped.ru_stime


def _write_projects(plain: Path, traced: Path, links: int) -> None:
    """The plain synthetic project, and a copy with two traces per strand that agree with it.

    The traces are what a clean handover would give: launch and receive cords of
    :data:`CORD_M` (``testing.otdr`` added to the copy's project.yaml), a connection at each end
    of the link and at each of its declared ``connections``, a splice at each declared splice
    (evenly spaced along the link), the fiber end at the documented length, and an end-to-end
    loss equal to the mean insertion loss the plain project records for that strand (so none of
    the OTDR cross-checks of docs/project-format.md §12.6 fires). The traced build then differs
    from the plain one by its OTDR content alone.
    """
    import csv
    import random
    import shutil

    from benchmarks.make_synthetic import make_project

    if plain.exists():
        shutil.rmtree(plain)
    if traced.exists():
        shutil.rmtree(traced)
    make_project(plain, links)
    shutil.copytree(plain, traced)
    yaml_path = traced / "project.yaml"
    text = yaml_path.read_text(encoding="utf-8")
    assert "\n  units: m\n" in text  # testing's last key in make_synthetic.PROJECT_YAML
    yaml_path.write_text(text.replace("\n  units: m\n", "\n  units: m\n" + OTDR_YAML), encoding="utf-8")
    losses = _insertion_losses(plain)
    rows = list(csv.DictReader((plain / "links.csv").open(encoding="utf-8")))
    (traced / "otdr").mkdir()
    index = ["file,link_id,strand,direction"]
    rng = random.Random(13)
    for number, row in enumerate(rows):
        wavelength = 1310 if row["fiber_type"].startswith("OS") else 850
        for strand in range(1, int(row["strands"]) + 1):
            loss_db = losses[(row["link_id"], strand, wavelength)]
            for direction, sor in _strand_traces(row, strand, wavelength, loss_db, rng):
                name = f"t{number:05d}-{strand}-{direction}.sor"
                (traced / "otdr" / name).write_bytes(write_sor(sor))
                index.append(f"{name},{row['link_id']},{strand},{direction}")
    (traced / "otdr" / "index.csv").write_text("\n".join(index) + "\n", encoding="utf-8")


def _insertion_losses(project: Path) -> dict[tuple[str, int, int], float]:
    """Mean insertion loss [dB] per (link, strand, wavelength) over both directions, a retest
    (results/retests.csv) replacing the first reading of the same direction."""
    import csv

    readings: dict[tuple[str, int, int, str], float] = {}
    files = sorted((project / "results").glob("batch-*.csv")) + [project / "results" / "retests.csv"]
    for path in files:
        for row in csv.DictReader(path.open(encoding="utf-8")):
            key = (row["link_id"], int(row["strand"]), int(row["wavelength_nm"]), row["direction"])
            readings[key] = float(row["loss_db"])
    grouped: dict[tuple[str, int, int], list[float]] = {}
    for (link_id, strand, wavelength, _direction), loss in readings.items():
        grouped.setdefault((link_id, strand, wavelength), []).append(loss)
    return {key: sum(values) / len(values) for key, values in grouped.items()}


def _strand_traces(row: dict[str, str], strand: int, wavelength: int, loss_db: float,
                   rng) -> list[tuple[str, object]]:
    """The a→b and b→a traces of one strand (see :func:`_write_projects`)."""
    length = float(row["length_m"])
    connections, splices = int(row["connections"]), int(row["splices"])
    alpha = ALPHA_DB_PER_KM[wavelength]
    inner = connections + splices  # evenly spaced, connections first
    places = [length * (k + 1) / (inner + 1) for k in range(inner)]
    splice_events = [(x, round(rng.uniform(0.02, 0.10), 3), round(rng.uniform(-0.05, 0.05), 3))
                     for x in places[connections:]]
    # the connections (both ends and the inner ones) share what fiber and splices leave of the loss
    rest = loss_db - alpha * length / 1000.0 - sum(loss for _x, loss, _s in splice_events)
    each = round(max(0.05, rest / (connections + 2)), 3)
    far_end = each
    if each > 0.6:  # a strand the plain project fails with a bad connection: at the B end
        each = 0.35
        far_end = round(rest - each * (connections + 1), 3)
    events = [(x, loss, round(rng.uniform(-55.0, -47.0), 1), 0.0)
              for x, loss in ((0.0, each), *((x, each) for x in places[:connections]),
                              (length, far_end))]
    events += [(x, loss, None, step) for x, loss, step in splice_events]
    total = round(sum(loss for _x, loss, _r, _s in events) + alpha * length / 1000.0, 3)
    out = []
    for direction in ("ab", "ba"):
        one_way = []
        for x, loss, refl, step in events:
            seen = x if direction == "ab" else length - x
            shift = step if direction == "ab" else -step  # backscatter difference: gain one way
            one_way.append((seen + CORD_M, round(loss + shift, 3), refl))
        sor = synth_sor(sorted(one_way), length + 2 * CORD_M, alpha_db_per_km=alpha, noise_db=0.01,
                        pulse_ns=30, seed=rng.randrange(1 << 30), extra_m=100.0,
                        cable_id=row["link_id"], fiber_id=str(strand),
                        origin=row["end_a" if direction == "ab" else "end_b"],
                        terminus=row["end_b" if direction == "ab" else "end_a"],
                        nominal_wavelength_nm=wavelength, wavelength_nm=float(wavelength),
                        total_loss_db=total)
        out.append((direction, sor))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--files", type=int, default=1000)
    parser.add_argument("--samples", type=int, default=30_000)
    parser.add_argument("--report", type=int, metavar="LINKS", help="compare full builds instead")
    parser.add_argument("--rounds", type=int, default=1, help="with --report: alternating rounds")
    parser.add_argument("--keep", type=Path, help="with --report: folder for the two projects")
    args = parser.parse_args()
    if args.report:
        report_comparison(args.report, args.rounds, args.keep)
        return
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
