"""Stage 1, inputs: read the project folder and check it into model objects.

Everything that opens a file of the project (project.yaml, links.csv, results/*.csv,
limit files, the application table, the logo) lives here, and nothing else in
reportgen reads the project folder. Every reader collects its problems as
:class:`reportgen.errors.InputProblem` (file, line, field, what was expected, what was
found); :func:`reportgen.inputs.project.load_project` raises one
:class:`reportgen.errors.InputError` holding all of them.

May import: ``reportgen.model``, ``reportgen.errors``, ``reportgen.units`` and
modules of this package. Never the engine, report, pdf or export stages.
"""
