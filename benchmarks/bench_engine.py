"""Time loading + validating and judging a synthetic project (no report rendering).

Targets (issue "loss-budget engine"), on the 2-core reference machine:
judging 100,000 results in under 1 s, loading them in under 3 s.

    python benchmarks/bench_engine.py                 # 12,500 links = 100,000 results
    python benchmarks/bench_engine.py --links 1250 --repeat 5
"""
from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from make_synthetic import make_project  # noqa: E402

from reportgen.engine.applications import assess_project  # noqa: E402
from reportgen.engine.judge import judge_project  # noqa: E402
from reportgen.inputs.project import load_project  # noqa: E402

LOAD_TARGET_S = 3.0
JUDGE_TARGET_S = 1.0


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--links", type=int, default=12_500)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="reportgen-bench-") as tmp:
        project_dir = make_project(Path(tmp) / "project", links=args.links, seed=args.seed)
        load_s, judge_s, assess_s = [], [], []
        for _ in range(args.repeat):
            start = time.perf_counter()
            project = load_project(project_dir)
            load_s.append(time.perf_counter() - start)
            start = time.perf_counter()
            judgement = judge_project(project)
            judge_s.append(time.perf_counter() - start)
            start = time.perf_counter()
            assess_project(project, judgement)
            assess_s.append(time.perf_counter() - start)
    results = len(project.results)
    print(f"{args.links} links, {results} results, median of {args.repeat} runs")
    print(f"  load + validate: {statistics.median(load_s):6.2f} s  (target < {LOAD_TARGET_S} s)")
    print(f"  judge:           {statistics.median(judge_s):6.2f} s  (target < {JUDGE_TARGET_S} s)")
    print(f"  applications:    {statistics.median(assess_s):6.2f} s")
    ok = statistics.median(load_s) < LOAD_TARGET_S and statistics.median(judge_s) < JUDGE_TARGET_S
    print("targets met" if ok else "TARGETS MISSED")
    return 0 if ok else 1


if __name__ == "__main__":
    raise SystemExit(main())
