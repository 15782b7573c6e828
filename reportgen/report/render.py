"""Rendering: view model + Jinja templates → the report's HTML documents.

``build_report`` returns a :class:`ReportDocument`: the complete ``report.html``
and the parts reportgen.pdf renders separately (front matter, runs of link sheets,
appendix), all sharing one stylesheet and one set of ``@page`` rules.

Contract with reportgen.pdf:

- every part is a complete HTML document with the same CSS;
- each link sheet's first element has ``id="link-<slug>"`` (:func:`link_views.link_anchors`),
  front-matter and appendix sections have ids too;
- elements with ``data-bookmark`` / ``data-bookmark-level`` and an ``id`` are outline
  entries; headings carry ``bookmark-level: none``;
- the bottom-right page margin box is left empty for the page stamp
  (:func:`reportgen.report.messages.page_label`);
- page numbers in PDF parts are empty ``page-slot`` links pdf.py fills in after the
  merge (``front(page_of, total_pages)`` may also print numbers ``page_of`` gives).

Applications and power budgets (``applications``, a
:class:`reportgen.engine.applications.ProjectApplications`) add a block to each link sheet and
a project section ``id="applications"`` (matrix and power list): in the front matter
after the link register for small projects, else as parts of their own between the
link sheets and the appendix (:data:`view_apps.FRONT_MATRIX_MAX_LINKS`).
"""
from __future__ import annotations

import functools
import re
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import BinaryIO, Final

import jinja2
from jinja2.sandbox import ImmutableSandboxedEnvironment
from markupsafe import Markup

from reportgen.report import charts
from reportgen.report.documents import LazyDocuments, squeeze_html, squeezed_pieces

from reportgen.report import diagrams

from reportgen.report import formats, messages
from reportgen.report import i18n
from reportgen.report.i18n import ENGLISH, Language
from reportgen.report.messages_appendix import customer_status
from reportgen.report.messages_findings import RULE_TEXT, THRESHOLD_UNIT, finding_text
from reportgen.report import matrix_pages
from reportgen.report.register_pages import RegisterPlanner, RegisterRows, register_runs
from reportgen.engine.applications import ProjectApplications
from reportgen.engine.findings import Findings
from reportgen.engine.judge import Judgement
from reportgen.report import level_diagram, otdr_figure, text_table
from reportgen.engine.otdr import OtdrAssessment
from reportgen.model import Project
from reportgen.report.link_views import LinkView, otdr_figure_key
from reportgen.report.viewmodel import ArchiveView, ReportView, build_view

TEMPLATE_MAIN: Final = "report.html.j2"
STYLESHEETS: Final = ("report.css", "print.css")

# How the PDF is cut into parts (ReportDocument.bodies), each rendered by a worker.
# Most link sheets per PDF body part. A part costs little besides its sheets (about 0.07 s
# of CPU for a fresh worker and its fonts, measured), and a rebuild renders the whole run
# that holds a changed link: runs of 20 rather than 40 took the 500-link rebuild after one
# changed result from 18-19 % to 14 % of the full build's time, runs of 10 rather than 20
# from 16.5-17.7 % to 14.7-16.3 % with the full build no slower (benchmarks/README.md).
LINKS_PER_PART: Final = 10
MIN_LINKS_PER_PART: Final = 10
# Small reports are cut finer so that both render workers stay busy to the end.
TARGET_PARTS: Final = 8
# The register and the applications matrix are cut into PDF parts of a few planned pages
# (reportgen.report.page_plan).
# The front matter and the appendix of our templates are PDF parts of a few pieces each,
# cut where a page break is anyway, so that a rebuild renders again only the piece that
# changed (the part cache, reportgen.pdf.cache): the cover holds the manifest digest,
# which changes with any input file, the charts plot every result, the register and the
# list of links needing action change with a link's verdict or worst margin, and the list
# of input files (last in the appendix) changes with any input file.
FRONT_SECTIONS: Final = ("cover", "lists", "register", "charts")  # the first is the front part
APPENDIX_SECTIONS: Final = ("main", "files")


def templates_dir() -> Path:
    """Our templates: inside the installed package, else the source checkout's top level."""
    package = Path(__file__).resolve().parent.parent
    packaged = package / "templates"
    return packaged if packaged.is_dir() else package.parent / "templates"


@dataclass(frozen=True)
class ReportDocument:
    """The rendered report: one HTML file, and the parts of the PDF, each made when read."""

    _html: Callable[[], Iterator[str]] = field(repr=False, compare=False)
    # after the front part: the rest of the front matter (FRONT_SECTIONS, our templates),
    # runs of link sheets, applications, the appendix (APPENDIX_SECTIONS, our templates)
    bodies: Sequence[str]
    _front: Callable[[Mapping[str, int] | None, int | None], str] = field(repr=False, compare=False)
    # only our own templates are known to write well-formed XML (see reportgen.pdf.weasy.parse_xml)
    own_templates: bool = True
    front_bodies: int = 0  # how many of the bodies are pieces of the front matter (the first ones)

    @property
    def html(self) -> str:
        """The complete self-contained report.html (made anew each time it is read)."""
        return "".join(squeezed_pieces(self._html()))

    def write_html(self, handle: BinaryIO) -> None:
        """Write report.html to ``handle`` (UTF-8) piece by piece: the same bytes as
        :attr:`html`, without the whole text in memory (259 MB for 20,000 links)."""
        for piece in squeezed_pieces(self._html()):
            handle.write(piece.encode("utf-8"))

    def front(self, page_of: Mapping[str, int], total_pages: int) -> str:
        """The front part (the cover; all the front matter with a project's own templates)
        as a complete HTML document, with absolute page numbers."""
        return self._front(page_of, total_pages)

    def front_matter(self) -> list[str]:
        """The documents of the whole front matter, page slots left empty."""
        return [self.front({}, 1), *self.bodies[:self.front_bodies]]


def chunk_links(links: tuple[LinkView, ...], size: int | None = None) -> list[tuple[LinkView, ...]]:
    """Link sheets split into runs for the PDF body parts.

    By default runs of up to LINKS_PER_PART sheets; a small report is cut into about
    TARGET_PARTS runs (at least MIN_LINKS_PER_PART sheets each) to balance the workers.
    """
    if size is None:
        size = min(LINKS_PER_PART, max(MIN_LINKS_PER_PART, -(-len(links) // TARGET_PARTS)))
    return [links[i:i + size] for i in range(0, len(links), size)]


def css_string(text: object) -> Markup:
    """``text`` as a quoted CSS string, every character outside [A-Za-z0-9 ] hex-escaped
    (six digits and a terminating space, so a following blank is kept).

    Safe inside a ``<style>`` element: no quote, backslash, ``<`` or newline survives.
    """
    out = []
    for char in str(text):
        out.append(char if char.isascii() and (char.isalnum() or char == " ") else f"\\{ord(char):06x} ")
    return Markup('"' + "".join(out) + '"')


@functools.lru_cache(maxsize=8)
def make_environment(project_templates: Path | None, length_unit: str = "m",
                     lang: Language = ENGLISH) -> jinja2.Environment:
    """A strict Jinja environment: the project's templates first, ours as fallback per file.

    The words (``t``, ``msg``, ``msgn``, ``glossary``, ``safety``, ``finding_text``,
    ``rule_text``), the gettext calls of ``jinja2.ext.i18n`` (``_``, ``gettext``,
    ``ngettext``, ``{% trans %}``) and the number filters are those of ``lang``.

    Cached (compiling the templates costs about half a second); the loaders still notice
    edited template files. Callers must not modify the returned environment.
    """
    loaders: list[jinja2.BaseLoader] = []
    if project_templates is not None:
        loaders.append(jinja2.FileSystemLoader(str(project_templates)))
    loaders.append(jinja2.FileSystemLoader(str(templates_dir())))
    # Sandboxed: a project's own templates are untrusted input. They may format and
    # loop, but cannot reach Python internals (attributes starting with "_",
    # function globals) nor mutate the data they are given. Ours alone are part of this
    # program and render the same without the sandbox's check of every attribute read
    # (a quarter of the time of the HTML, which a rebuild makes for every part; the same
    # text: tests/test_render.py).
    kind = jinja2.Environment if project_templates is None else ImmutableSandboxedEnvironment
    env = kind(
        loader=jinja2.ChoiceLoader(loaders),
        autoescape=True,
        undefined=jinja2.StrictUndefined,  # a misspelt name fails the build, never a blank cell
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
        extensions=["jinja2.ext.i18n"],
    )
    env.install_gettext_translations(lang.translations, newstyle=True)  # type: ignore[attr-defined]
    env.filters.update(
        db=functools.partial(formats.format_db, lang=lang),
        status=functools.partial(customer_status, lang=lang),
        dbm=functools.partial(formats.format_dbm, lang=lang),
        km=functools.partial(formats.format_km, lang=lang),
        length=functools.partial(formats.format_length, unit=length_unit, lang=lang),
        date=functools.partial(formats.format_date, lang=lang),
        datetime=functools.partial(formats.format_date, with_time=True, lang=lang),
        css_string=css_string,
        setting=functools.partial(formats.format_setting, lang=lang),
    )
    words = messages.Words(lang)
    env.globals.update(t=words, msg=words.format, msgn=words.plural, glossary=words.glossary(),
                       safety=words.safety(),
                       finding_text=functools.partial(finding_text, lang=lang),
                       rule_text={rule: (lang.gettext(what), lang.gettext(basis))
                                  for rule, (what, basis) in RULE_TEXT.items()},
                       threshold_unit=THRESHOLD_UNIT, text_table=text_table.text_table)
    return env


_CSS_COMMENT: Final = re.compile(r"/\*.*?\*/", re.S)
_CSS_BLANKS: Final = re.compile(r"\s*\n\s*")


def stylesheet(env: jinja2.Environment) -> Markup:
    """Our CSS files (or the project's replacements) joined, for inlining (comments and
    line breaks dropped: every part parses this text again)."""
    texts = []
    for name in STYLESHEETS:
        source, _, _ = env.loader.get_source(env, name)  # type: ignore[union-attr]
        source = _CSS_BLANKS.sub("\n", _CSS_COMMENT.sub("", source)).strip()
        texts.append(source.replace("</", "<\\/"))
    return Markup("\n".join(texts))


def toc_entries(view: ReportView) -> list[tuple[str, str, int]]:
    """(anchor, catalogue key, level) of the contents list, in document order."""
    apps = view.apps
    entries = [("needs-action", "action_heading", 1), ("register", "register_heading", 1)]
    if apps is not None and apps.in_front:
        entries.append(("applications", "apps_heading", 1))
    entries.append(("charts", "charts_heading", 1))
    if view.links:
        entries.append(("link-sheets", "links_heading", 1))
    if apps is not None and not apps.in_front:
        entries.append(("applications", "apps_heading", 1))
    entries += [("appendix", "appendix_heading", 1), ("appx-instruments", "instruments_heading", 2),
                ("appx-technicians", "technicians_heading", 2), ("appx-method", "method_heading", 2),
                ("appx-limits", "limits_heading", 2)]
    if apps is not None:
        entries.append(("appx-applications", "appx_apps_heading", 2))
    if view.rules:
        entries.append(("appx-audit", "audit_heading", 2))
    entries += [("appx-safety", "safety_heading", 2), ("appx-glossary", "glossary_heading", 2)]
    if view.input_files:
        entries.append(("appx-files", "files_heading", 2))
    return entries


def power_diagrams(project: Project, judgement: Judgement, view: ReportView,
                   assessed: ProjectApplications | None, lang: Language = ENGLISH) -> dict[str, Markup]:
    """The power level diagram (inline SVG) of every link with a power budget, by anchor.

    The steps follow the link's loss budget (the engine's, ``judgement.budget_table``) at
    the wavelength whose losses were used; without a budget there (wavelength not in the
    limit set) the link is one step.
    """
    if assessed is None:
        return {}
    out: dict[str, Markup] = {}
    for link, link_view in zip(project.links, view.links):
        power = assessed.power.get(link.link_id)
        if power is None:
            continue
        budget = judgement.budget_table.get(link.link_id, power.wavelength_nm)
        labels = level_diagram.translated_labels(lang)
        out[link_view.anchor] = Markup(level_diagram.power_level_svg(
            power, level_diagram.level_steps(budget, labels), labels, lang=lang))
    return out


def otdr_figures(project: Project, view: ReportView, otdr: OtdrAssessment | None,
                 lang: Language = ENGLISH) -> dict[str, Markup]:
    """The OTDR trace figure (inline SVG) of every strand and wavelength, by figure key."""
    if otdr is None:
        return {}
    anchors = {link.link_id: link.anchor for link in view.links}
    settings = project.testing.otdr
    labels = otdr_figure.translated_labels(lang)
    return {otdr_figure_key(anchors[s.link_id], s.strand, s.wavelength_nm):
            Markup(otdr_figure.trace_svg(s, settings, labels, lang))
            for s in otdr.strands}


class _LossDiagrams(Mapping[str, Markup]):
    """The loss diagram (inline SVG) of each link by anchor, drawn each time it is asked for.

    report.html and the PDF parts each ask once (from different threads). Not kept:
    drawing takes 0.2 ms and 3.6 kB a link (measured), and report.html's thread runs far
    ahead of the PDF parts, so keeping them held every link's diagram at once.
    """

    def __init__(self, links: Sequence[LinkView], lang: Language = ENGLISH) -> None:
        self._lang = lang
        self._links = {link.anchor: link for link in links}

    def __getitem__(self, anchor: str) -> Markup:
        return Markup(diagrams.loss_diagram(self._links[anchor], self._lang))

    def __iter__(self) -> Iterator[str]:
        return iter(self._links)

    def __len__(self) -> int:
        return len(self._links)


class _Renderer:
    """Renders the parts of one report from one view model."""

    def __init__(self, env: jinja2.Environment, view: ReportView,
                 power_svgs: Mapping[str, Markup] | None = None,
                 otdr_svgs: Mapping[str, Markup] | None = None, lang: Language = ENGLISH) -> None:
        self.env = env
        self.view = view
        self.template = env.get_template(TEMPLATE_MAIN)
        self.common = {
            "report": view,
            "css": stylesheet(env),
            "diagrams": _LossDiagrams(view.links, lang),
            "charts": {"margins": charts.svg_data_uri(charts.margin_chart(view.links, lang)),
                       "verdicts": charts.svg_data_uri(charts.verdict_chart(view.totals, lang))},
            "toc": toc_entries(view),
            "power_diagrams": dict(power_svgs or {}),
            "otdr_figures": dict(otdr_svgs or {}),
            "otdr_labels": otdr_figure.translated_labels(lang),
        }

    def render(self, part: str, links: tuple = (), first_part: bool = False,
               page_of: Mapping[str, int] | None = None, total_pages: int | None = None,
               matrix_groups: tuple | None = None, section: str | None = None,
               register_rows: RegisterRows | None = None, matrix_first: bool = False) -> str:
        """One document; ``section`` names the one piece of the front matter or appendix
        it shows (:data:`FRONT_SECTIONS`, :data:`APPENDIX_SECTIONS`), None: all of ``part``;
        ``register_rows`` the run of the register it shows (None: all of it)."""
        return squeeze_html("".join(self.generate(
            part, links, first_part, page_of, total_pages, matrix_groups, section,
            register_rows, matrix_first)))

    def generate(self, part: str, links: tuple = (), first_part: bool = False,
                 page_of: Mapping[str, int] | None = None, total_pages: int | None = None,
                 matrix_groups: tuple | None = None, section: str | None = None,
                 register_rows: RegisterRows | None = None,
                 matrix_first: bool = False) -> Iterator[str]:
        """The text of :meth:`render` before squeezing, in the template's own pieces."""
        if matrix_groups is None:
            matrix_groups = self.view.apps.groups if self.view.apps is not None else ()
        return self.template.generate(
            **self.common, part=part, links=links, first_part=first_part, page_of=page_of or {},
            total_pages=total_pages, matrix_groups=matrix_groups,
            front_section=section if part == "front" else None,
            appendix_section=section if part == "appendix" else None,
            register_rows=register_rows or RegisterRows(self.view.links),
            matrix_first=matrix_first)

    def front(self, page_of: Mapping[str, int] | None, total_pages: int | None,
              section: str | None = None) -> str:
        return self.render("front", page_of=page_of or {}, total_pages=total_pages,
                           section=section)


def register_pieces(view: ReportView, lang: Language = ENGLISH) -> list[RegisterRows]:
    """The register's PDF parts: its pages planned (:mod:`reportgen.report.register_pages`),
    a few to a part."""
    words = messages.Words(lang)
    intro = words["register_intro"]
    if view.finding_counts and view.finding_counts.get("error"):  # as the template prints it
        intro += " " + words.format("register_errors_key", mark=words["mark_sev_error"])
    planner = RegisterPlanner(view.paper, view.length_unit, lang)
    return register_runs(planner.pages(view.links, intro))


def language_of(project: Project, language: str | None = None) -> Language:
    """The report's language: ``language`` when given (``build --language``), else the
    project's ``report.language`` (default English)."""
    return i18n.language(language or project.report.language)


def build_report(
    project: Project,
    judgement: Judgement,
    *,
    now: datetime,
    version: str,
    applications: ProjectApplications | None = None,
    findings: Findings | None = None,
    otdr: OtdrAssessment | None = None,
    archive: ArchiveView | None = None,
    language: str | None = None,
) -> ReportDocument:
    """Render the report of a judged project.

    ``now`` and ``version`` are printed as given (determinism: same input, same HTML).
    ``applications`` (applications.assess_project) adds the applications and power
    budget sections; ``archive`` (the files embedded in the PDF and the report's digest)
    puts the digest on the cover and the list of files in the appendix. ``language``
    (``build --language``) overrides the project's ``report.language``.
    """
    lang = language_of(project, language)
    view = build_view(project, judgement, now=now, version=version, assessed=applications,
                      findings=findings, otdr=otdr, archive=archive, lang=lang)
    env = make_environment(project.report.templates, view.length_unit, lang)
    renderer = _Renderer(env, view, power_diagrams(project, judgement, view, applications, lang),
                         otdr_figures(project, view, otdr, lang), lang)
    # Our own templates: the front matter and appendix are cut into the pieces of
    # FRONT_SECTIONS and APPENDIX_SECTIONS, each a PDF part (see their comment). A
    # project's own templates may predate the pieces: their front matter and appendix
    # stay one part each.
    pieces = project.report.templates is None
    makers: list[Callable[[], str]] = []
    if pieces:
        for section in FRONT_SECTIONS[1:]:
            runs = register_pieces(view, lang) if section == "register" else [None]
            makers += [functools.partial(renderer.render, "front", section=section,
                                         register_rows=rows) for rows in runs]
    first_run = len(makers)
    makers += [functools.partial(renderer.render, "body", links=chunk, first_part=index == 0)
               for index, chunk in enumerate(chunk_links(view.links))]
    if view.apps is not None and not view.apps.in_front:
        # the power list, then the matrix in parts of a few planned pages, the first with
        # the matrix's heading and legend (reportgen.report.matrix_pages)
        makers.append(functools.partial(renderer.render, "applications", first_part=True,
                                        matrix_groups=()))
        pages = matrix_pages.plan_pages(view.apps.groups, view.paper, lang)
        makers += [functools.partial(renderer.render, "applications", matrix_groups=groups,
                                     matrix_first=index == 0)
                   for index, groups in enumerate(matrix_pages.matrix_runs(pages))]
    last_run = len(makers) - 1
    if not pieces:
        makers.append(functools.partial(renderer.render, "appendix"))
    else:
        makers += [functools.partial(renderer.render, "appendix", section=section)
                   for section in APPENDIX_SECTIONS if section != "files" or view.input_files]
    bodies = LazyDocuments(makers)
    front = (functools.partial(renderer.front, section=FRONT_SECTIONS[0]) if pieces
             else renderer.front)
    # one part of each kind now, so that a template error fails before the long work
    for index in {0, first_run, last_run, len(makers) - 1}:
        if 0 <= index < len(makers):
            bodies[index]
    return ReportDocument(
        _html=functools.partial(renderer.generate, "all", links=view.links, first_part=True),
        bodies=bodies, _front=front, own_templates=pieces, front_bodies=first_run)
