"""Stage 5, export: results.csv, summary.json and atomic writing of the output folder.

Serialises what the engine concluded (nothing here decides anything) and moves
finished files into place, last, after everything else succeeded.

May import: ``reportgen.model``, ``reportgen.errors``, ``reportgen.units``, the
``engine`` stage and modules of this package.
"""
