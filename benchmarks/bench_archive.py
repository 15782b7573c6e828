"""Time the archive and the comparison on synthetic campaigns.

Targets (issue "owner's estate"), on the 2-core reference machine:
- ``archive add`` of a 2,000-link campaign (16,000 results) under 5 s on SQLite;
- ``archive links --supports X`` over 100 campaigns (200,000 results) under 1 s, on SQLite and
  on PostgreSQL;
- ``compare`` of two 12,500-link campaigns (100,000 results each) under 5 s.

    python benchmarks/bench_archive.py                          # SQLite only
    python benchmarks/bench_archive.py --pg postgresql+psycopg://postgres@127.0.0.1:5432/bench

The PostgreSQL database given with --pg must be empty (it is filled, not cleaned up).
"""
from __future__ import annotations

import argparse
import dataclasses
import hashlib
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from make_synthetic import make_project  # noqa: E402

from reportgen import cli, pipeline  # noqa: E402
from reportgen.archive import store  # noqa: E402
from reportgen.archive.campaign import read_build_folder  # noqa: E402
from reportgen.archive.db import Archive  # noqa: E402

ADD_TARGET_S = 5.0
LINKS_TARGET_S = 1.0
COMPARE_TARGET_S = 5.0


def _build(tmp: Path, name: str, links: int, seed: int) -> Path:
    project = make_project(tmp / f"{name}-project", links=links, seed=seed)
    out = tmp / f"{name}-build"
    pipeline.build(project, out, report=False)
    return out


def _timed(label: str, target: float, action) -> float:  # type: ignore[no-untyped-def]
    started, cpu = time.perf_counter(), time.process_time()
    action()
    elapsed, cpu = time.perf_counter() - started, time.process_time() - cpu
    # CPU time of this process too: on a shared machine wall time includes waiting for a core
    # (the database server's own CPU time is not in it)
    print(f"{label}: {elapsed:.2f} s wall, {cpu:.2f} s CPU (target < {target:g} s)"
          f"{'' if elapsed < target else '  ABOVE TARGET (wall)'}")
    return elapsed


def bench_add(tmp: Path, urls: dict[str, str]) -> None:
    folder = _build(tmp, "add2000", 2000, 3)
    for name, url in urls.items():
        archive = Archive(url, create=True)
        _timed(f"add 2,000 links / 16,000 results, {name} (read + store)", ADD_TARGET_S,
               lambda: store.add_campaign(archive, read_build_folder(folder)))


def bench_links(tmp: Path, urls: dict[str, str]) -> None:
    # 100 campaigns of 250 links (2,000 results each): 200,000 results at 10 sites, 10
    # campaigns per site tested a year apart, so each link has 10 states.
    base = read_build_folder(_build(tmp, "links250", 250, 5))
    for name, url in urls.items():
        archive = Archive(url, create=True)
        started = time.perf_counter()
        for number in range(100):
            year = 2000 + number // 10
            rows = tuple(row._replace(tested_at=f"{year}{row.tested_at[4:]}")
                         for row in base.rows)
            campaign = dataclasses.replace(
                base, rows=rows, label=f"synthetic {number}",
                digest=hashlib.sha256(f"{base.digest}-{number}".encode()).hexdigest())
            store.add_campaign(archive, campaign, site_override=f"Synthetic site {number % 10}")
        print(f"filling {name}: 100 campaigns, 200,000 results: "
              f"{time.perf_counter() - started:.1f} s")
        found: list = []
        _timed(f"links --supports 10GBASE-SR over 100 campaigns, {name}", LINKS_TARGET_S,
               lambda: found.extend(store.latest_links(archive, supports="10GBASE-SR")))
        print(f"  {len(found)} links found")


def bench_compare(tmp: Path) -> None:
    before = _build(tmp, "cmp-a", 12_500, 1)
    after = _build(tmp, "cmp-b", 12_500, 2)
    out = tmp / "cmp-out"
    _timed("compare two 12,500-link builds (read, compare, write html/csv/json)",
           COMPARE_TARGET_S,
           lambda: cli.main(["compare", str(before), str(after), "-o", str(out), "--no-pdf"]))
    # compare.pdf of 12,500 links is a long report: rendered by the PDF workers, timed apart
    # (no target: the target is for the comparison)
    started = time.perf_counter()
    cli.main(["compare", str(before), str(after), "-o", str(tmp / "cmp-pdf")])
    print(f"  the same with compare.pdf: {time.perf_counter() - started:.1f} s wall")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--pg", help="an empty PostgreSQL database's URL")
    parser.add_argument("--only", choices=["add", "links", "compare"])
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="reportgen-bench-") as tmp_text:
        tmp = Path(tmp_text)
        for part in ("add", "links", "compare"):
            if args.only and part != args.only:
                continue
            urls = {"SQLite": f"sqlite:///{tmp / f'{part}.sqlite'}"}
            if args.pg:
                urls["PostgreSQL"] = args.pg
            if part == "add":
                bench_add(tmp, urls)
            elif part == "links":
                bench_links(tmp, urls)
            else:
                bench_compare(tmp)
    return 0


if __name__ == "__main__":
    sys.exit(main())
