"""Time incremental rebuilds (part cache) and cluster rendering against local builds.

Usage (from the repository root)::

    python benchmarks/bench_rebuild.py                    # both, 500 and 100 links
    python benchmarks/bench_rebuild.py --rebuild-links 500 --skip-cluster
    python benchmarks/bench_rebuild.py --cluster-links 100 --skip-rebuild

* **Rebuild**: a synthetic project (``make_synthetic.py``) is built once into an empty output
  folder (a full build, which also fills ``.reportgen-cache``); then one loss value of one
  result is changed and the project built again into the same folder. Target: the rebuild
  takes under 15 % of the full build's wall time. The rebuilt PDF is checked to equal a
  ``--no-cache`` build of the changed project, byte for byte.
* **Cluster**: ``--no-cache`` builds with ``--jobs 2`` (two local worker processes) and with
  ``--cluster`` on a ``distributed.LocalCluster`` of two worker processes (one thread each)
  started here: one build on the workers just started, then ``--cluster-rounds`` cluster builds
  alternating with local ones, each against the mean of the local builds around it. Target: the
  cluster build under 1.15x the local one. The PDFs must be equal.

Each build is ``python -m reportgen build`` in a child process (wall time of that process),
with ``SOURCE_DATE_EPOCH`` fixed. Run with nothing else busy on the machine.
"""

from __future__ import annotations

import argparse
import hashlib
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Final

REPO: Final = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(REPO))  # cluster workers started here import this tree

from make_synthetic import make_project  # noqa: E402

EPOCH: Final = "1900000000"


def build(project: Path, out: Path, *options: str) -> float:
    env = {**os.environ, "SOURCE_DATE_EPOCH": EPOCH,
           "PYTHONPATH": os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])}
    started = time.perf_counter()
    subprocess.run([sys.executable, "-m", "reportgen", "build", str(project), "-o", str(out),
                    *options], check=True, env=env, cwd=REPO, stdout=subprocess.DEVNULL)
    return time.perf_counter() - started


def pdf_digest(out: Path) -> str:
    return hashlib.sha256((out / "report.pdf").read_bytes()).hexdigest()


def change_one_result(project: Path) -> None:
    """Raise the first loss value of the first results file by 0.05 dB."""
    path = sorted((project / "results").glob("*.csv"))[0]
    lines = path.read_text(encoding="utf-8").splitlines(keepends=True)
    header = lines[0].rstrip("\n").split(",")
    column = header.index("loss_db")
    cells = lines[1].rstrip("\n").split(",")
    cells[column] = f"{float(cells[column]) + 0.05:.2f}"
    lines[1] = ",".join(cells) + "\n"
    path.write_text("".join(lines), encoding="utf-8")


def bench_rebuild(links: int, folder: Path) -> None:
    project = make_project(folder / f"rebuild-{links}", links=links, seed=1)
    out = folder / f"rebuild-{links}-out"
    full_s = build(project, out)
    change_one_result(project)
    rebuild_s = build(project, out)
    reference = folder / f"rebuild-{links}-reference"
    build(project, reference, "--no-cache")
    same = pdf_digest(out) == pdf_digest(reference)
    print(f"rebuild, {links} links: full build {full_s:.1f} s, rebuild after one changed result "
          f"{rebuild_s:.1f} s = {100 * rebuild_s / full_s:.1f} % (target < 15 %); "
          f"PDF equal to a build from scratch: {same}", flush=True)


def bench_cluster(links: int, folder: Path, rounds: int) -> None:
    """One build on workers just started, then ``rounds`` pairs of a local build and a
    cluster build, alternating, so that the machine's drift (two shared cores: the same
    local build took 13 to 19 s within ten minutes) falls on both sides alike."""
    from distributed import LocalCluster

    project = make_project(folder / f"cluster-{links}", links=links, seed=1)
    build(project, folder / "warm-out", "--no-cache", "--jobs", "2")  # page cache, .pyc
    os.environ["PYTHONPATH"] = os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    local_s: list[float] = []
    cluster_s: list[float] = []
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None, host="127.0.0.1") as cluster:
        address = cluster.scheduler_address
        local_s.append(build(project, folder / "local-out", "--no-cache", "--jobs", "2"))
        first_s = build(project, folder / "cluster-out", "--no-cache", "--cluster", address)
        first_ratio = first_s / local_s[0]
        for _ in range(rounds):
            cluster_s.append(build(project, folder / "cluster-out-2", "--no-cache",
                                   "--cluster", address))
            local_s.append(build(project, folder / "local-out", "--no-cache", "--jobs", "2"))
    same = (pdf_digest(folder / "local-out") == pdf_digest(folder / "cluster-out")
            == pdf_digest(folder / "cluster-out-2"))
    ratios = [c / ((a + b) / 2) for c, a, b in zip(cluster_s, local_s, local_s[1:])]
    print(f"cluster, {links} links: workers just started {first_s:.1f} s against local "
          f"{local_s[0]:.1f} s just before = {first_ratio:.2f}x; running cluster, {rounds} rounds "
          f"(each against the mean of the local builds before and after it): "
          f"{', '.join(f'{r:.2f}x' for r in ratios)}, median {statistics.median(ratios):.2f}x; "
          f"medians local {statistics.median(local_s):.1f} s, cluster "
          f"{statistics.median(cluster_s):.1f} s (target < 1.15x); PDFs equal: {same}",
          flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rebuild-links", type=int, default=500)
    parser.add_argument("--cluster-links", type=int, default=100)
    parser.add_argument("--cluster-rounds", type=int, default=3,
                        help="alternating local and cluster builds on the running cluster")
    parser.add_argument("--skip-rebuild", action="store_true")
    parser.add_argument("--skip-cluster", action="store_true")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="reportgen-bench-") as name:
        folder = Path(name)
        if not args.skip_rebuild:
            bench_rebuild(args.rebuild_links, folder)
        if not args.skip_cluster:
            bench_cluster(args.cluster_links, folder, args.cluster_rounds)


if __name__ == "__main__":
    main()
