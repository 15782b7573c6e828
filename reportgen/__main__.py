from reportgen.cli import run

raise SystemExit(run())
