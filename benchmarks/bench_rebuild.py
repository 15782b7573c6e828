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
  started here. Target: the cluster build under 1.15x the local one. Both PDFs must be equal.

Each build is ``python -m reportgen build`` in a child process (wall time of that process),
with ``SOURCE_DATE_EPOCH`` fixed. Run with nothing else busy on the machine.
"""

from __future__ import annotations

import argparse
import hashlib
import os
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


def bench_cluster(links: int, folder: Path) -> None:
    from distributed import LocalCluster

    project = make_project(folder / f"cluster-{links}", links=links, seed=1)
    local_s = build(project, folder / "local-out", "--no-cache", "--jobs", "2")
    os.environ["PYTHONPATH"] = os.pathsep.join([str(REPO), os.environ.get("PYTHONPATH", "")])
    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None, host="127.0.0.1") as cluster:
        # first build: the workers were just started; second: they have rendered before
        first_s = build(project, folder / "cluster-out", "--no-cache",
                        "--cluster", cluster.scheduler_address)
        second_s = build(project, folder / "cluster-out-2", "--no-cache",
                         "--cluster", cluster.scheduler_address)
    same = (pdf_digest(folder / "local-out") == pdf_digest(folder / "cluster-out")
            == pdf_digest(folder / "cluster-out-2"))
    print(f"cluster, {links} links: two local processes {local_s:.1f} s, local two-worker "
          f"cluster {first_s:.1f} s = {first_s / local_s:.2f}x with workers just started, "
          f"{second_s:.1f} s = {second_s / local_s:.2f}x on the second build "
          f"(target < 1.15x); PDFs equal: {same}", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--rebuild-links", type=int, default=500)
    parser.add_argument("--cluster-links", type=int, default=100)
    parser.add_argument("--skip-rebuild", action="store_true")
    parser.add_argument("--skip-cluster", action="store_true")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="reportgen-bench-") as name:
        folder = Path(name)
        if not args.skip_rebuild:
            bench_rebuild(args.rebuild_links, folder)
        if not args.skip_cluster:
            bench_cluster(args.cluster_links, folder)


if __name__ == "__main__":
    main()
