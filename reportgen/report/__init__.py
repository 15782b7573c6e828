"""Stage 3, report: what a person reads. View model, text catalogue, numbers, templates.

The view model (:mod:`reportgen.report.viewmodel`, each link's in
:mod:`reportgen.report.link_views`) turns the engine's conclusions into
plain frozen data; :mod:`reportgen.report.render` renders it through the Jinja templates
of the repository's ``templates/`` folder into report.html and the parts of the PDF.
Diagrams and charts are drawn here; the terminal tables of ``reportgen check`` too.
Reads no project file (the inputs stage hands over everything, the logo included).

May import: ``reportgen.model``, ``reportgen.errors``, ``reportgen.units``, the
``inputs`` stage (to describe the built-in tables), the ``engine`` stage, and
modules of this package.
"""
