"""Time the report build and measure the peak memory of its whole process tree.

Usage (from the repository root)::

    python benchmarks/bench_report.py                      # real build: 100, 500, 2000 links
    python benchmarks/bench_report.py --sizes 100 500 --single
    python benchmarks/bench_report.py --sizes 100 500 --single-only   # the comparison alone
    python benchmarks/bench_report.py --synthetic-parts --links-per-part 20 40 100
    python benchmarks/bench_report.py --sizes 2000 --single --single-2000   # ~20 min, ~12 GB

Modes:

* default: ``reportgen.pipeline.build(project_dir, out_dir)`` on a project written by
  ``benchmarks/make_synthetic.py`` (validate, judge, HTML, PDF, all outputs);
* ``--synthetic-parts``: ``reportgen.pdf.engine.render_pdf`` alone, on generated parts (a page per
  link with an 8-row table and a small inline SVG; a front matter with contents and a summary
  table with page numbers), split into ``--links-per-part`` links per body part;
* ``--single``: for comparison, one plain WeasyPrint render of the same print HTML joined
  into one document (the front matter with the page numbers of the parted build). Sizes
  above 500 only with ``--single-2000``.

Each measurement runs in a fresh child process; a sampler polls /proc every 0.1 s and
sums the memory of that child and all its descendants (worker processes included), two
ways: the resident memory (RSS), which counts a page shared by several processes once in
each (the worker processes share most of theirs with the fork server they were forked
from), and the proportional set size (PSS, /proc/PID/smaps_rollup), which splits a
shared page among its sharers: the sum of PSS is the memory the tree occupies. The peak
of each sum is reported, and the build process's own RSS at the PSS peak. Targets (see the PDF engine's brief): the
2,000-link build in under half the single-render time, peak under 2 GB, and time per
link at 2,000 at most 1.2x the time per link at 100.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import re
import subprocess
import sys
import threading
import time
from collections.abc import Mapping
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Final

REPO: Final = Path(__file__).resolve().parent.parent
BENCH_DIR: Final = Path(__file__).resolve().parent
DEFAULT_SIZES: Final = (100, 500, 2000)
SINGLE_LIMIT_LINKS: Final = 500
SAMPLE_PERIOD_S: Final = 0.1
CREATED: Final = datetime(2030, 1, 15, 9, 0, tzinfo=timezone.utc)
PAGE_SIZE_B: Final = os.sysconf("SC_PAGE_SIZE")
CLOCK_TICKS_PER_S: Final = os.sysconf("SC_CLK_TCK")

SYNTHETIC_CSS: Final = """<style>
@page { size: A4; margin: 18mm 15mm 16mm 15mm }
body { font-family: DejaVu Sans; font-size: 9.5pt }
h1, h2 { bookmark-level: none }
.link { break-before: page }
table { table-layout: fixed; width: 100%; border-collapse: collapse }
td, th { border: 0.5pt solid #888; padding: 1.5pt 3pt }
</style>"""


# -- memory of a process tree, from /proc -------------------------------------------------

def _children_map() -> dict[int, list[int]]:
    children: dict[int, list[int]] = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            stat = Path(f"/proc/{entry}/stat").read_text()
        except OSError:
            continue
        ppid = int(stat.rsplit(")", 1)[1].split()[1])
        children.setdefault(ppid, []).append(int(entry))
    return children


def _pss_b(pid: int) -> int:
    """The proportional set size of ``pid`` [bytes] (0 once it has ended)."""
    try:
        for line in Path(f"/proc/{pid}/smaps_rollup").read_text().splitlines():
            if line.startswith("Pss:"):
                return int(line.split()[1]) * 1024
    except (OSError, ValueError):
        pass
    return 0


def sample_tree(pid: int, cpu_s: dict[int, float]) -> tuple[int, int, int]:
    """Return the RSS and the PSS summed over ``pid`` and its descendants, and the RSS
    of ``pid`` alone [bytes].

    Also records in ``cpu_s`` the CPU time (user + system) seen so far for each of them.
    """
    children = _children_map()
    rss, pss, own, stack = 0, 0, 0, [pid]
    while stack:
        current = stack.pop()
        try:
            resident_pages = int(Path(f"/proc/{current}/statm").read_text().split()[1])
            fields = Path(f"/proc/{current}/stat").read_text().rsplit(")", 1)[1].split()
            cpu_s[current] = (int(fields[11]) + int(fields[12])) / CLOCK_TICKS_PER_S
        except (OSError, IndexError, ValueError):
            resident_pages = 0
        rss += resident_pages * PAGE_SIZE_B
        pss += _pss_b(current)
        if current == pid:
            own = resident_pages * PAGE_SIZE_B
        stack.extend(children.get(current, []))
    return rss, pss, own


def run_measured(args: list[str]) -> dict[str, Any]:
    """Run this script as a child with ``args``; return its JSON result plus peak tree RSS."""
    started_s = time.perf_counter()
    child = subprocess.Popen([sys.executable, __file__, *args], stdout=subprocess.PIPE,
                             text=True, env={**os.environ, "PYTHONPATH": str(REPO)})
    peak_b = peak_pss_b = own_at_peak_b = 0
    peak_at_s = 0.0
    cpu_s: dict[int, float] = {}
    stop = threading.Event()

    def sample() -> None:
        nonlocal peak_b, peak_pss_b, own_at_peak_b, peak_at_s
        while not stop.is_set():
            rss_b, pss_b, own_b = sample_tree(child.pid, cpu_s)
            peak_b = max(peak_b, rss_b)
            if pss_b > peak_pss_b:
                peak_pss_b, own_at_peak_b = pss_b, own_b
                peak_at_s = time.perf_counter() - started_s
            stop.wait(SAMPLE_PERIOD_S)

    sampler = threading.Thread(target=sample, daemon=True)
    sampler.start()
    output, _ = child.communicate()
    stop.set()
    sampler.join()
    if child.returncode != 0:
        raise SystemExit(f"measurement {args} failed with status {child.returncode}")
    result = json.loads(output.strip().splitlines()[-1])
    if "pdf" in result:  # counted here, outside the measured process tree
        result["pages"] = _page_count(Path(result.pop("pdf")))
    result["peak_pss_at_s"] = peak_at_s
    result["peak_tree_rss_gb"] = peak_b / 1e9
    result["peak_tree_pss_gb"] = peak_pss_b / 1e9
    result["build_process_rss_at_pss_peak_gb"] = own_at_peak_b / 1e9
    result["tree_cpu_s"] = sum(cpu_s.values())  # misses each process's last < 0.1 s
    result["child_wall_s"] = time.perf_counter() - started_s
    return result


# -- synthetic parts ---------------------------------------------------------------------

def synthetic_link(index: int) -> str:
    rows = "".join(
        f"<tr><td>S{strand}</td><td>{wavelength}</td><td>{direction}</td>"
        f"<td>{0.3 + (index * 7 + strand * 3 + wavelength) % 90 / 100:.2f}</td><td>pass</td></tr>"
        for strand in (1, 2) for wavelength in (850, 1300) for direction in ("A-B", "B-A"))
    points = " ".join(f"{x * 20},{60 - (x * 13 + index) % 50}" for x in range(11))
    return (f'<section class="link"><h2 id="link-{index}" data-bookmark="Link L{index:05d}" '
            f'data-bookmark-level="2">Link L{index:05d}</h2>'
            f"<p>Room {index % 40} to room {(index * 3) % 50}, OM4, {20 + index % 280} m</p>"
            "<table><tr><th>Strand</th><th>nm</th><th>Dir.</th><th>Loss dB</th><th>Verdict</th>"
            f"</tr>{rows}</table>"
            f'<svg width="220" height="70" viewBox="0 0 220 70"><polyline points="{points}" '
            'fill="none" stroke="#236" stroke-width="1.5"/><text x="4" y="68" font-size="8">'
            "distance</text></svg>"
            '<p><a href="#summary">back to the summary</a></p></section>')


def synthetic_parts(links: int, links_per_part: int) -> tuple[Any, list[str]]:
    bodies = []
    for start in range(0, links, links_per_part):
        sections = "".join(synthetic_link(i) for i in range(start, min(links, start + links_per_part)))
        heading = ('<h1 id="links" data-bookmark="Link sheets" data-bookmark-level="1">'
                   "Link sheets</h1>" if start == 0 else "")
        bodies.append(f"<html><head>{SYNTHETIC_CSS}</head><body>{heading}{sections}</body></html>")

    def front(page_of: Mapping[str, int], total_pages: int) -> str:
        rows = "".join(f'<tr><td><a href="#link-{i}">L{i:05d}</a></td><td>pass</td>'
                       f'<td>{page_of.get(f"link-{i}", "")}</td></tr>' for i in range(links))
        return (f"<html><head>{SYNTHETIC_CSS}</head><body>"
                '<h1 id="cover" data-bookmark="Cover" data-bookmark-level="1">Test report</h1>'
                f"<p>{links} links, {total_pages} pages</p>"
                '<h1 id="summary" class="link" data-bookmark="Summary" data-bookmark-level="1">'
                f"Summary</h1><table><tr><th>Link</th><th>Verdict</th><th>Page</th></tr>{rows}"
                "</table></body></html>")

    return front, bodies


# -- one measurement (run in the child) --------------------------------------------------

def join_documents(documents: list[str]) -> str:
    """One HTML document: the first's head, then every document's body content in order."""
    head = re.search(r"(?is)^.*?<body[^>]*>", documents[0])
    assert head is not None
    inner = [re.sub(r"(?is)^.*?<body[^>]*>|</body>.*$", "", doc) for doc in documents]
    return head.group(0) + "".join(inner) + "</body></html>"


def real_parts(links: int, work_dir: Path) -> tuple[Any, list[str], Path, str]:
    sys.path.insert(0, str(BENCH_DIR))
    from make_synthetic import make_project  # noqa: PLC0415 (benchmarks/ is on the path)

    from reportgen import pipeline

    from reportgen.report import render  # noqa: PLC0415
    project_dir = make_project(work_dir / f"project-{links}", links=links, seed=1)
    project = pipeline.validate_only(project_dir)
    outcome = pipeline.compute(project)
    document = render.build_report(project, outcome.judgement, now=CREATED, version="bench",
                                   applications=outcome.applications)
    return document.front, list(document.bodies), project.root, project.info.title


def measure(mode: str, links: int, links_per_part: int, work_dir: Path) -> dict[str, Any]:
    import logging  # noqa: PLC0415

    from reportgen.pdf import engine as pdf  # noqa: PLC0415
    logging.basicConfig(level=logging.INFO, format="  %(message)s", stream=sys.stderr)
    logging.getLogger("weasyprint").setLevel(logging.WARNING)
    logging.getLogger("weasyprint.progress").setLevel(logging.WARNING)
    logging.getLogger("fontTools").setLevel(logging.WARNING)
    started_s = time.perf_counter()
    if mode == "build":
        sys.path.insert(0, str(BENCH_DIR))
        from make_synthetic import make_project  # noqa: PLC0415

        from reportgen import pipeline  # noqa: PLC0415
        project_dir = make_project(work_dir / f"project-{links}", links=links, seed=1)
        started_s = time.perf_counter()
        # no part cache: a work folder kept from an earlier run must not make a build cheap
        pipeline.build(project_dir, work_dir / f"out-{links}", now=CREATED, cache=False)
        # pages counted by the parent once this process has ended: reading a 20,000-page
        # file here took 0.8 GB and 50 s, and was counted as the build's until 2026-12-04
        return {"wall_s": time.perf_counter() - started_s,
                "pdf": str(work_dir / f"out-{links}" / "report.pdf"), "parts": None}
    if mode == "synthetic":
        front, bodies = synthetic_parts(links, links_per_part)
        root, title = work_dir, "Synthetic"
    else:  # single: same print HTML as the parted build, joined into one document
        if mode == "single-synthetic":
            front, bodies = synthetic_parts(links, links_per_part)
            root, title = work_dir, "Synthetic"
        else:
            front, bodies, root, title = real_parts(links, work_dir)
        return _single(front, bodies, root, title)
    data = pdf.render_pdf(front, bodies, root=root, title=title, created=CREATED)
    (work_dir / f"synthetic-{links}.pdf").write_bytes(data)
    return {"wall_s": time.perf_counter() - started_s,
            "pdf": str(work_dir / f"synthetic-{links}.pdf"), "parts": len(bodies)}


def _single(front: Any, bodies: list[str], root: Path, title: str) -> dict[str, Any]:
    from weasyprint import HTML  # noqa: PLC0415

    from reportgen.pdf.fetcher import make_url_fetcher, root_url  # noqa: PLC0415
    from reportgen.pdf.engine import PageMap  # noqa: PLC0415
    # page numbers in the front matter do not change the work: placeholders will do
    html = join_documents([front(PageMap({}, 999), 999), *bodies])
    started_s = time.perf_counter()
    document = HTML(string=html, base_url=root_url(root), url_fetcher=make_url_fetcher(root))
    data = document.write_pdf()
    wall_s = time.perf_counter() - started_s
    import pypdf  # noqa: PLC0415
    return {"wall_s": wall_s, "pages": len(pypdf.PdfReader(io.BytesIO(data)).pages),
            "parts": 1, "bytes": len(data)}


def _page_count(path: Path) -> int:
    import pikepdf  # noqa: PLC0415
    with pikepdf.open(path) as pdf:
        return len(pdf.pages)


# -- driver ------------------------------------------------------------------------------

def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=list(DEFAULT_SIZES))
    parser.add_argument("--synthetic-parts", action="store_true",
                        help="drive render_pdf with generated parts instead of the real build")
    parser.add_argument("--links-per-part", type=int, nargs="+", default=[40],
                        help="synthetic mode: links per body part (several values compare)")
    parser.add_argument("--single", action="store_true",
                        help="also time one plain WeasyPrint render of the same HTML")
    parser.add_argument("--single-only", action="store_true",
                        help="time only the single render (skip the parted build)")
    parser.add_argument("--single-2000", action="store_true",
                        help=f"allow --single above {SINGLE_LIMIT_LINKS} links (slow: ~20 min and ~12 GB at 2,000)")
    parser.add_argument("--work-dir", type=Path, default=Path("/tmp/reportgen-bench"))
    parser.add_argument("--child", nargs=3, metavar=("MODE", "LINKS", "PER_PART"),
                        help=argparse.SUPPRESS)
    args = parser.parse_args()
    args.work_dir.mkdir(parents=True, exist_ok=True)
    if args.child:
        mode, links, per_part = args.child[0], int(args.child[1]), int(args.child[2])
        print(json.dumps(measure(mode, links, per_part, args.work_dir)))
        return

    rows = []
    load = os.getloadavg()[0]
    print(f"load average before start: {load:.2f} (2 cores; other work skews the figures)")
    for per_part in args.links_per_part if args.synthetic_parts else [0]:
        for links in args.sizes:
            mode = "synthetic" if args.synthetic_parts else "build"
            if not args.single_only:
                result = run_measured(["--work-dir", str(args.work_dir), "--child", mode,
                                       str(links), str(per_part)])
                rows.append((mode, links, per_part, result))
                _print_row(*rows[-1])
            if (args.single or args.single_only) and (links <= SINGLE_LIMIT_LINKS or args.single_2000):
                single = "single-synthetic" if args.synthetic_parts else "single"
                result = run_measured(["--work-dir", str(args.work_dir), "--child", single,
                                       str(links), str(per_part or 40)])
                rows.append((single, links, per_part, result))
                _print_row(*rows[-1])
    _print_targets(rows)


def _print_row(mode: str, links: int, per_part: int, result: dict[str, Any]) -> None:
    per_link_ms = 1000 * result["wall_s"] / links
    part = f" {per_part:>3}/part" if per_part else ""
    print(f"{mode:<17}{links:>6} links{part} {result['pages']:>6} pages "
          f"{result['wall_s']:8.1f} s {per_link_ms:7.1f} ms/link "
          f"cpu {result['tree_cpu_s']:7.1f} s "
          f"peak RSS {result['peak_tree_rss_gb']:5.2f} GB, PSS {result['peak_tree_pss_gb']:5.2f} GB "
          f"(build process {result['build_process_rss_at_pss_peak_gb']:4.2f} GB, "
          f"{result['peak_pss_at_s']:.0f} s of {result['child_wall_s']:.0f} s)  "
          f"(load {os.getloadavg()[0]:.1f})",
          flush=True)


def _print_targets(rows: list[tuple[str, int, int, dict[str, Any]]]) -> None:
    parted = {(links, per_part): r for mode, links, per_part, r in rows
              if mode in ("build", "synthetic")}
    single = {links: r for mode, links, _, r in rows if mode.startswith("single")}  # last wins
    for (links, per_part), result in sorted(parted.items()):
        notes = [f"peak of all processes {'<' if result['peak_tree_pss_gb'] < 2 else '>='} 2 GB "
                 f"(PSS; RSS summed: {result['peak_tree_rss_gb']:.2f} GB)"]
        if (100, per_part) in parted and links != 100:
            ratio = (result["wall_s"] / links) / (parted[(100, per_part)]["wall_s"] / 100)
            notes.append(f"per-link time {ratio:.2f}x that at 100 (target <= 1.2)")
        if links in single:
            share = result["wall_s"] / single[links]["wall_s"]
            notes.append(f"{share:.2f} of the single render's time (target < 0.5)")
        print(f"{links} links: " + "; ".join(notes))


if __name__ == "__main__":
    main()
