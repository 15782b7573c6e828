"""Stage 6, the archive: build outputs (summary.json + results.csv) into a database, and
campaign comparison.

Reads what a build wrote (never a project folder: the command line builds one in memory
first), stores it with SQLAlchemy core in SQLite or PostgreSQL, answers questions across
campaigns and compares two campaigns link by link (``compare.py``, the one comparison rule,
used by ``reportgen compare`` and by ``reportgen archive history``).

May import: model, errors, units, engine, export, and pdf (to read the data a report.pdf
carries).
"""
