"""Time loading 100,000 results imported from an .xlsx sheet against the native CSV load.

Target (issue "meter exports as they come"), on the 2-core reference machine: the import
load stays within 3x the native one. Both loads validate everything (project.yaml, links,
every result row); only the route of the results differs.

    python benchmarks/bench_import.py                 # 12,500 links = 100,000 results
    python benchmarks/bench_import.py --links 1250 --repeat 5

The .xlsx file is written once by openpyxl (not timed): one row per result, headers
"Cable ID", "Fibre", "Wavelength (nm)", "Direction" (A->B, B->A), "Loss (dB)" (numbers),
"Date" (date cells) and "Time" (text), read through a profile with a values mapping, split
date and time, and a date format.
"""
from __future__ import annotations

import argparse
import csv
import datetime as dt
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from make_synthetic import make_project  # noqa: E402

from reportgen.inputs.project import load_project  # noqa: E402

RATIO_TARGET = 3.0
PROFILE = """\
as: results
columns:
  link_id: "Cable ID"
  strand: "Fibre"
  wavelength_nm: "Wavelength (nm)"
  direction: "Direction"
  loss_db: "Loss (dB)"
  tested_date: "Date"
  tested_time: "Time"
values:
  direction: {ab: "A->B", ba: "B->A"}
date_format: "%d.%m.%Y"
"""


def make_import_copy(native: Path, out: Path) -> Path:
    """``native`` with its results/*.csv moved into one sheet of exports/results.xlsx."""
    import openpyxl

    shutil.copytree(native, out)
    book = openpyxl.Workbook(write_only=True)
    sheet = book.create_sheet("Results")
    sheet.append(["Cable ID", "Fibre", "Wavelength (nm)", "Direction", "Loss (dB)", "Date", "Time",
                  "Remark"])
    for path in sorted((out / "results").glob("*.csv")):
        with path.open(encoding="utf-8", newline="") as handle:
            for row in csv.DictReader(handle):
                moment = dt.datetime.fromisoformat(row["tested_at"])
                sheet.append([row["link_id"], int(row["strand"] or 1), int(row["wavelength_nm"]),
                              {"ab": "A->B", "ba": "B->A"}[row["direction"] or "ab"],
                              float(row["loss_db"]), moment.date(), moment.strftime("%H:%M"), ""])
    shutil.rmtree(out / "results")
    (out / "exports").mkdir()
    book.save(out / "exports" / "results.xlsx")
    (out / "profiles").mkdir()
    (out / "profiles" / "meter.yaml").write_text(PROFILE, encoding="utf-8")
    with (out / "project.yaml").open("a", encoding="utf-8") as handle:
        handle.write('\nimports:\n  - files: exports/results.xlsx\n    profile: profiles/meter.yaml\n')
    return out


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--links", type=int, default=12_500)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args(argv)
    with tempfile.TemporaryDirectory(prefix="reportgen-bench-") as tmp:
        native = make_project(Path(tmp) / "native", links=args.links, seed=args.seed)
        imported = make_import_copy(native, Path(tmp) / "imported")
        size_mb = (imported / "exports" / "results.xlsx").stat().st_size / 2**20
        native_s, import_s = [], []
        for _ in range(args.repeat):
            start = time.perf_counter()
            a = load_project(native)
            native_s.append(time.perf_counter() - start)
            start = time.perf_counter()
            b = load_project(imported)
            import_s.append(time.perf_counter() - start)
    assert len(a.results) == len(b.results), "both routes must read every result"
    ratio = statistics.median(import_s) / statistics.median(native_s)
    print(f"{args.links} links, {len(b.results)} results, median of {args.repeat} runs "
          f"(xlsx file {size_mb:.1f} MB)")
    print(f"  native CSV load:  {statistics.median(native_s):6.2f} s")
    print(f"  xlsx import load: {statistics.median(import_s):6.2f} s  ({ratio:.2f}x, target <= {RATIO_TARGET}x)")
    ok = ratio <= RATIO_TARGET
    print("target met" if ok else "TARGET MISSED")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
