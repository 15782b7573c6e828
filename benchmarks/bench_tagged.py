"""Time a build without and with the structure tree (``report.tagged: true``).

Usage (from the repository root)::

    python benchmarks/bench_tagged.py [--links 100] [--rounds 2] [--jobs 2]

Makes a synthetic project (benchmarks/make_synthetic.py) and builds it, alternately
untagged and tagged, ``--rounds`` times each, every build in a fresh process without the
part cache; prints the wall time and the peak memory of each build (the resident set of
the build process and of its largest worker process) and the ratios of the best times and
of the peaks. Timings are printed, never asserted.
"""
from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(Path(__file__).resolve().parent))

from make_synthetic import make_project  # noqa: E402


# Runs one build in this process, then prints the peak resident set (kB) of the process
# and of its worker processes (each worker is a child; the largest one counts).
MEASURED = """
import resource, sys
from reportgen.cli import main
status = main(sys.argv[1:])
own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
workers = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss
print(own, workers)
sys.exit(status)
"""


def build(project: Path, out: Path, jobs: int) -> tuple[float, int, int]:
    """Wall seconds and peak resident kB of the build process and of its largest worker."""
    started = time.perf_counter()
    done = subprocess.run([sys.executable, "-c", MEASURED, "build", str(project), "-o", str(out),
                           "--no-cache", "--jobs", str(jobs)], cwd=ROOT, check=True,
                          capture_output=True, text=True)
    seconds = time.perf_counter() - started
    own, workers = (int(value) for value in done.stdout.split()[-2:])
    return seconds, own, workers


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--links", type=int, default=100)
    parser.add_argument("--rounds", type=int, default=2)
    parser.add_argument("--jobs", type=int, default=2)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory(prefix="bench-tagged-") as folder:
        plain = Path(folder) / "plain"
        make_project(plain, args.links, seed=1)
        tagged = Path(folder) / "tagged"
        make_project(tagged, args.links, seed=1)
        yaml = tagged / "project.yaml"
        yaml.write_text(yaml.read_text(encoding="utf-8") + "report:\n  tagged: true\n",
                        encoding="utf-8")
        times: dict[str, list[float]] = {"untagged": [], "tagged": []}
        memory: dict[str, tuple[int, int]] = {}
        for round_number in range(args.rounds):
            for name, project in (("untagged", plain), ("tagged", tagged)):
                seconds, own, workers = build(project, Path(folder) / f"out-{name}", args.jobs)
                times[name].append(seconds)
                memory[name] = (max(memory.get(name, (0, 0))[0], own),
                                max(memory.get(name, (0, 0))[1], workers))
                print(f"round {round_number + 1} {name:9s} {seconds:7.1f} s  peak: build "
                      f"{own / 1024:.0f} MB, largest worker {workers / 1024:.0f} MB", flush=True)
        ratio = min(times["tagged"]) / min(times["untagged"])
        print(f"best untagged {min(times['untagged']):.1f} s, best tagged "
              f"{min(times['tagged']):.1f} s: tagged takes {ratio:.2f}x; peak build process "
              f"{memory['tagged'][0] / memory['untagged'][0]:.2f}x, largest worker "
              f"{memory['tagged'][1] / max(memory['untagged'][1], 1):.2f}x")


if __name__ == "__main__":
    main()
