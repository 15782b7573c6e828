"""Every word the report prints, in one place: this catalogue and its parts by concept
(``messages_apps`` applications and power, ``messages_appendix`` appendix and glossary,
``messages_findings`` audit findings), with the number formats in ``formats``.

Templates reach the catalogue in the report's language as ``t`` (``t.cover_heading``),
format texts with placeholders through ``msg("key", name=value)`` and texts with a count
through ``msgn("key", count, name=value)`` (singular and plural, ngettext); a template may
also call ``_``/``gettext``/``ngettext`` (``jinja2.ext.i18n``). The English texts here are
the gettext message ids, marked with ``N_`` and ``Np_`` for Babel's extraction; the
translations are in reportgen/locale/ (DEVELOPERS.md "Translate the report"). Python code
builds view models from data only; wording lives here or in the templates. Texts are plain
text: they are escaped on output like any input text.
"""
from __future__ import annotations

from collections.abc import Iterator, Mapping
from types import MappingProxyType
from typing import Final

from reportgen.report.formats import NO_VALUE, NOT_GIVEN
from reportgen.report.i18n import C_, ENGLISH, N_, Language, Np_
from reportgen.report.messages_appendix import APPENDIX_TEXT, GLOSSARY, SAFETY
from reportgen.report.messages_apps import APPS_TEXT

# Stamped by reportgen.pdf at the bottom right of every page after merging.
PAGE_LABEL: Final = N_("Page {page} of {pages}")
# The same, with the start of the report's digest (SHA-256 of its manifest) before it.
ARCHIVE_PAGE_LABEL: Final = N_("Digest {digest} \u00b7 Page {{page}} of {{pages}}")


def page_label(lang: Language = ENGLISH) -> str:
    """The page stamp, with ``{page}`` and ``{pages}`` left for the PDF stage."""
    return lang.gettext(PAGE_LABEL)


def archive_page_label(short_digest: str, lang: Language = ENGLISH) -> str:
    """The page stamp of an archive report: the digest's start, then "Page X of Y"."""
    return lang.gettext(ARCHIVE_PAGE_LABEL).format(digest=short_digest)


_REPORT_TEXT: Final[Mapping[str, str]] = MappingProxyType({
    # document
    "document_kind": N_("Fiber link acceptance record"),
    "generated": N_("Prepared {date} with reportgen {version}"),
    "header_prefix": N_("Acceptance record"),
    # cover
    "cover_heading": N_("Fiber link acceptance record"),
    "field_project": N_("Project"),
    "field_site": N_("Site"),
    "field_customer": N_("Customer"),
    "field_contractor": N_("Installer"),
    "field_contact": N_("Contact"),
    "field_job": N_("Job number"),
    "field_dates": N_("Tested"),
    "field_limits": N_("Limit set"),
    "field_method": N_("Reference method"),
    # the reference method's name inside a sentence (its values: one-cord, two-cord, three-cord)
    "method_name_one-cord": N_("one-cord"),
    "method_name_two-cord": N_("two-cord"),
    "method_name_three-cord": N_("three-cord"),
    "field_directions": N_("Directions"),
    "field_uncertainty": N_("Measurement uncertainty"),
    "not_given": NOT_GIVEN,
    "no_results_dates": N_("no results recorded"),
    "dates_range": N_("{first} to {last}"),
    "totals_heading": N_("Outcome"),
    "totals_links": N_("links"),
    "totals_pass": N_("pass"),
    "totals_fail": N_("fail"),
    "totals_incomplete": N_("incomplete"),
    "overall_empty": N_("The project lists no links."),
    "overall_errors_too": N_("Audit findings of severity error ({errors}) also block acceptance."),
    "findings_heading": N_("Audit findings"),
    "findings_intro": N_("Checks of the records beyond the loss limit (rules and thresholds in the appendix)."),
    "findings_count_error": N_("errors: block acceptance"),
    "findings_count_warning": N_("warnings: to review"),
    "findings_count_note": N_("notes"),
    "severity_error": N_("error"),
    "severity_warning": N_("warning"),
    "severity_note": N_("note"),
    "mark_sev_error": "\u25a0",
    "mark_sev_warning": "\u25c7",
    "mark_sev_note": "\u00b7",
    "findings_none_link": N_("No audit findings for this link."),
    "sheet_errors": N_("audit findings blocking acceptance: {count}"),
    "findings_project": N_("Whole project"),
    "col_severity": N_("Severity"),
    "col_finding": N_("Finding"),
    "col_evidence": N_("Evidence"),
    "evidence_lines": N_("{file} line {lines}"),
    "evidence_lines_more": N_("{file} lines {lines} \u2026 ({more} more)"),
    "evidence_setting": "project.yaml",
    "inspections_heading": N_("End-face inspections"),
    "inspections_passed": N_("Strand ends inspected once and passing, without picture or note: {count} ({first} to {last}; criteria: {criteria}). The table lists the others: failures, pictures, notes and repeated inspections."),
    "col_end": N_("End"),
    "col_inspection": N_("Result"),
    "col_criteria_note": N_("Criteria; note"),
    "col_picture": N_("Picture"),
    "inspection_pass": N_("pass"),
    "inspection_fail": N_("FAIL"),
    "end_a": "A",
    "end_b": "B",
    "audit_heading": N_("Audit rules and thresholds"),
    "audit_intro": N_(
        "Each rule gives at most one finding per link (or per instrument or reference for the "
        "whole project). Severity error blocks acceptance; a warning asks for review; a note "
        "informs. Thresholds are set under testing.audit in project.yaml; the value used here "
        "is shown with the default when it differs."
    ),
    "audit_references_given": N_("Reference records (references/) were given: the reference rules were applied."),
    "audit_references_absent": N_("No reference records (references/) were given: the reference rules were not applied."),
    "audit_inspections_given": N_("End-face inspection records (inspections/) were given: the inspection rules were applied."),
    "audit_inspections_absent": N_("No end-face inspection records (inspections/) were given: the inspection rules were not applied."),
    "col_rule": N_("Rule"),
    "col_checks": N_("What it checks"),
    "col_thresholds": N_("Thresholds"),
    "col_basis": N_("Basis"),
    "col_found": N_("Found"),
    "threshold_default": N_("default {value}"),
    "signoff_heading": N_("Acceptance"),
    "signoff_intro": N_(
        "Signed for the parties below: the links listed in this record were tested as described "
        "and the results are reproduced without alteration."
    ),
    "signoff_contractor": N_("For the installer"),
    "signoff_customer": N_("For the customer"),
    "signoff_name": N_("Name"),
    "signoff_role": C_("a person's position", "Position"),
    "signoff_signature": N_("Signature"),
    "signoff_date": N_("Date"),
    # contents
    "contents_heading": N_("Contents"),
    "contents_page": N_("page"),
    # needs action
    "action_heading": N_("Links needing action"),
    "action_none": N_("None: every link passes."),
    "action_intro": N_(
        "These links fail, lack required results or have audit findings of severity error. "
        "Failing links come first, then incomplete ones, then links held only by findings."
    ),
    "action_none_findings": N_("None: every link passes and no audit finding blocks acceptance."),
    "action_fail_item": N_("strand {strand}, {wavelength} nm, {direction}: loss {loss} dB over the {limit} dB limit (margin {margin} dB)"),
    "action_missing_item": N_("strand {strand}, {wavelength} nm, {direction}: {reason}"),
    "action_more": N_("\u2026 and {count} more on the link\u2019s sheet"),
    # register (summary table)
    "register_heading": N_("Link register"),
    "register_errors": N_("audit findings block acceptance"),
    "register_errors_key": N_("{mark} after the verdict: audit findings of severity error block acceptance of the link (see its sheet)."),
    "register_intro": N_("Every link in the order of the link list. Worst margin is the smallest margin of the judged results."),
    "col_link": N_("Link"),
    "col_ends": N_("From \u2192 to"),
    "col_fiber": N_("Fiber"),
    "col_length": N_("Length"),
    "col_strands": N_("Strands"),
    "col_worst": N_("Worst margin"),
    "col_verdict": N_("Verdict"),
    "col_page": N_("Page"),
    "col_strand": N_("Strand"),
    "col_wavelength": "\u03bb nm",
    "col_direction": N_("Dir."),
    "col_loss": N_("Loss dB"),
    "col_limit": N_("Limit dB"),
    "col_margin": N_("Margin dB"),
    "col_flags": N_("Notes"),
    "col_technician": N_("Technician"),
    "col_instrument": N_("Instruments"),
    "col_time": N_("Tested"),
    "col_reason": N_("Why not judged"),
    "col_source": N_("Source"),
    "col_item": N_("Item"),
    "col_quantity": N_("Quantity"),
    "col_allowance": N_("Allowance"),
    "col_loss_allowed": N_("Allowed dB"),
    "no_margin": NO_VALUE,
    # charts
    "charts_heading": N_("Margins at a glance"),
    "charts_intro": N_(
        "Each mark is one judged result (marks that would be drawn on top of one another are "
        "drawn once); its height is its margin to the limit (above the limit line: within the limit). Within each column the results are sorted, smallest "
        "margin on the left. Filled triangles mark results over the limit."
    ),
    "chart_margin_axis": N_("margin to limit [dB]"),
    "chart_margin_title": N_("Margins by fiber type and wavelength"),
    "chart_zero": N_("limit"),
    "chart_no_results": N_("no judged results"),
    "chart_counts_title": N_("Links by verdict"),
    "chart_counts_axis": N_("links"),
    # link sheet
    "links_heading": N_("Link sheets"),
    "link_heading": N_("Link {link_id}"),
    "link_definition": N_("Definition"),
    "field_ends": N_("Ends"),
    "field_end_a": N_("End A"),
    "field_end_b": N_("End B"),
    "field_fiber": N_("Fiber type"),
    "field_plant": N_("Cable construction"),
    "field_length": N_("Documented length"),
    "field_strands": N_("Strands"),
    "field_connections": N_("Connections between the ends"),
    "field_splices": N_("Splices"),
    "field_components": N_("Components"),
    "field_applications": N_("Applications"),
    "field_transceiver": N_("Transceiver"),
    "field_notes": N_("Notes"),
    "none": N_("none"),
    "plant_inside": N_("inside plant"),
    "plant_outside": N_("outside plant (incl. indoor-outdoor)"),
    "link_kind": N_("Link sheet"),
    "worst_margin_label": N_("worst margin"),
    "budget_heading": N_("Allowed loss, term by term"),
    "budget_intro": N_("Limit = fiber + connections + splices + components, with the end connections the {method} reference leaves in the measurement."),
    "budget_wavelength": N_("{wavelength} nm"),
    "budget_total": N_("Limit"),
    "term_fiber": N_("Fiber"),
    "term_end-connections": N_("End connections (reference method)"),
    "term_connections": N_("Connections between the ends"),
    "term_splices": N_("Splices"),
    "term_component": N_("Component {item}"),
    "unit_km": "km",
    "unit_each": N_("each"),
    "unit_db_per_km": "dB/km",
    "results_heading": N_("Measured results"),
    "results_none": N_("No valid result was recorded for this link."),
    "set_aside_heading": N_("Results set aside"),
    "set_aside_superseded": N_("replaced by a later test of the same strand, \u03bb and direction"),
    "set_aside_invalid": N_("negative loss beyond the uncertainty: the reference was bad; repeat the test"),
    "missing_heading": N_("Required results not available"),
    "missing_not-tested": N_("not tested"),
    "missing_invalid": N_("the latest test was invalid (negative loss)"),
    "direction_ab": N_("A\u2192B"),
    "direction_ba": N_("B\u2192A"),
    "direction_any": N_("either"),
    "source_row": N_("{file} line {line}"),
    "source_sheet_row": N_("{file}, sheet {sheet}, row {line}"),
    "diagram_heading": N_("Loss build-up"),
    "diagram_caption": N_(
        "Steps: the loss the limit set allows, added up along the link (positions not to scale). "
        "Right: every judged result per wavelength against its limit bar. "
        "\u25cb within the limit, \u25b2 over the limit."
    ),
    # verdict words (the contract's values; shown with a mark and a style of their own)
    "verdict_pass": N_("pass"),
    "verdict_fail": N_("fail"),
    "verdict_incomplete": N_("incomplete"),
    "verdict_invalid": N_("invalid"),
    "verdict_superseded": N_("superseded"),
    "verdict_not-judged": N_("not judged"),
    "mark_not-judged": "\u25c7",
    "mark_pass": "\u25cb",
    "mark_fail": "\u25b2",
    "mark_incomplete": "\u25cc",
    "mark_invalid": "\u00d7",
    "mark_superseded": "\u2013",
    # flags
    "flag_within-uncertainty": N_("within uncertainty of the limit"),
    "flag_negative-loss": N_("negative loss"),
    "flag_retest": N_("retest"),
    "flag_calibration-overdue": N_("instrument past calibration"),
    "flag_not-required": N_("wavelength not required"),
    "flag_no-cabling-limit": N_("for the applications only (no cabling limit at this \u03bb)"),
    # diagram labels
    "dg_end": N_("end"),
    "dg_fiber": N_("fiber"),
    "dg_splice": N_("spl."),
    "dg_connection": N_("conn."),
    "dg_component": N_("part"),
    "dg_axis": "dB",
    "dg_start": "A",
    "dg_finish": "B",
    "dg_limit": N_("limit {value}"),
    "dg_results": N_("results"),
    # OTDR results on a link sheet
    "otdr_heading": N_("OTDR: events along the fiber"),
    "otdr_strand": N_("Strand {strand}, {wavelength} nm"),
    "otdr_length": N_("Fiber length measured {measured}, documented {documented} (allowed difference {tolerance})."),
    "otdr_length_missing": N_("The trace shows no fiber end: length not measured."),
    "otdr_total": N_("End-to-end loss by the instrument: {value} dB."),
    "otdr_files": N_("Source: {files}"),
    "otdr_caption": N_("In the figures below both directions share one distance axis from end A (from B mirrored); the trace passes through the lowest and highest sample of every pixel column, so narrow reflections stay visible. Diamond: connection; circle: splice; square: other event; filled: fails. Checks of a strand that do not hold are listed with the link\u2019s audit findings."),
    "col_event_no": N_("No."),
    "col_position": C_("along the fiber", "Position"),
    "col_event": N_("Event"),
    "col_event_loss": N_("Loss"),  # over "A→B / B→A [dB]" (the event table's second header line)
    "col_verdict_notes": N_("Verdict, notes"),
    "col_loss_avg": N_("Average"),
    "col_remeasured": N_("Re-measured"),  # over "LSA [dB]"
    "col_reflectance": N_("Reflectance"),
    "col_allowance_short": N_("Allowed"),
    # the event table's headers before it was set as text, kept for a project's own templates
    "col_loss_one_way": N_("Loss A→B / B→A"),
    "col_lsa": N_("Re-measured (LSA)"),
    "otdr_kind_launch": N_("launch"),
    "otdr_kind_connector": N_("connection"),
    "otdr_kind_splice": N_("splice"),
    "otdr_kind_bend": N_("bend"),
    "otdr_kind_reflective": N_("reflective event"),
    "otdr_kind_end": N_("fiber end"),
    "otdr_kind_other": N_("other"),
    "otdr_flag_negative-average": N_("negative average"),
    "otdr_flag_one-way": N_("seen from one end only"),
    "otdr_flag_in-cord": N_("inside a test cord"),
    "otdr_flag_lsa-differs": N_("trace disagrees with the instrument's table"),
})

# Texts with a count: (singular, plural), chosen by ngettext for the language's plural rule.
PLURAL_TEXT: Final[Mapping[str, tuple[str, str]]] = MappingProxyType({
    "overall_all_pass": Np_(
        "The {links} link meets the limit set on every required result.",
        "Every one of the {links} links meets the limit set on every required result."),
    "overall_blocked": Np_(
        "The {links} link meets the limit set on every required result, but audit findings of "
        "severity error ({errors}) block acceptance until they are resolved (see \u201cLinks "
        "needing action\u201d).",
        "Every one of the {links} links meets the limit set on every required result, but audit "
        "findings of severity error ({errors}) block acceptance until they are resolved (see "
        "\u201cLinks needing action\u201d)."),
    "overall_not_ready": Np_(
        "{pass_} of {links} link meets the limit set; failing: {fail}; incomplete (required "
        "results missing): {incomplete}. The work is not ready for acceptance until these "
        "are resolved (see \u201cLinks needing action\u201d).",
        "{pass_} of {links} links meet the limit set; failing: {fail}; incomplete (required "
        "results missing): {incomplete}. The work is not ready for acceptance until these "
        "are resolved (see \u201cLinks needing action\u201d)."),
    "judged_count": Np_("{judged} result judged", "{judged} results judged"),
    "technician_results": Np_("{count} result", "{count} results"),
    "power_list_ok_unlisted": Np_(
        "A further {count} link with a transceiver is ok: both cases inside the receiver window "
        "(see the link\u2019s sheet).",
        "A further {count} links with a transceiver are ok: both cases inside the receiver window "
        "(see each link\u2019s sheet)."),
    "cover_values_unconfirmed": Np_(
        "{count} of the published values this report uses is not yet checked against the "
        "standard\u2019s text; the appendix lists each value and its status.",
        "{count} of the published values this report uses are not yet checked against the "
        "standard\u2019s text; the appendix lists each value and its status."),
    "link_apps_end_allowance": Np_(
        "The {method} reference leaves {count} of the 2 end connections out of the measured "
        "loss; a working channel has it. {added} dB ({count} \u00d7 {connection} dB, the limit "
        "set\u2019s connection allowance) is therefore added to the worst loss before it is "
        "compared with a maximum (channel loss, receive minimum); minimums (PON class minimum, "
        "overload) use the loss as measured.",
        "The {method} reference leaves {count} of the 2 end connections out of the measured "
        "loss; a working channel has them. {added} dB ({count} \u00d7 {connection} dB, the limit "
        "set\u2019s connection allowance) is therefore added to the worst loss before it is "
        "compared with a maximum (channel loss, receive minimum); minimums (PON class minimum, "
        "overload) use the loss as measured."),
})

# The whole catalogue by key (every key in one of the parts, none in two: tested).
TEXT: Final[Mapping[str, str]] = MappingProxyType({**_REPORT_TEXT, **APPS_TEXT, **APPENDIX_TEXT})


class Words(Mapping[str, str]):
    """The catalogue in one language: ``t.key`` or ``t["key"]`` in a template."""

    def __init__(self, lang: Language = ENGLISH) -> None:
        self._lang = lang

    def __getitem__(self, key: str) -> str:
        return self._lang.gettext(TEXT[key])

    def __iter__(self) -> Iterator[str]:
        return iter(TEXT)

    def __len__(self) -> int:
        return len(TEXT)

    def format(self, key: str, /, **values: object) -> str:
        """The text ``key`` with its ``{placeholders}`` filled in (``msg`` in templates)."""
        return self[key].format(**values)

    def plural(self, key: str, count: int, /, **values: object) -> str:
        """The text ``key`` of PLURAL_TEXT for ``count`` (``msgn`` in templates)."""
        singular, plural = PLURAL_TEXT[key]
        return self._lang.ngettext(singular, plural, count).format(**values)

    def glossary(self) -> tuple[tuple[str, str], ...]:
        return tuple((self._lang.gettext(term), self._lang.gettext(meaning))
                     for term, meaning in GLOSSARY)

    def safety(self) -> tuple[str, ...]:
        return tuple(self._lang.gettext(item) for item in SAFETY)


def msg(key: str, /, **values: object) -> str:
    """The English catalogue text ``key`` with its ``{placeholders}`` filled in."""
    return TEXT[key].format(**values)
