"""Stage 2, engine: the rules. Budgets, verdicts, applications and power budgets.

Pure functions over model objects and pandas frames: no file or network I/O, no
formatting of numbers for people, no words of the report. Each rule is written once
here, vectorised where it runs over every result, and the per-link views (a link's
budget term by term, a link's application list) come from the same code.

May import: ``reportgen.model``, ``reportgen.errors``, ``reportgen.units`` and
modules of this package.
"""
