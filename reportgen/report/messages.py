"""Every word the report prints, in one place (templates, diagrams, charts, page stamp).

Templates reach this catalogue as ``t`` (``t.cover_heading``) and format texts with
placeholders through ``msg("key", name=value)``. Python code builds view models from
data only; wording lives here or in the templates. Texts are plain text: they are
escaped on output like any input text.
"""
from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import TYPE_CHECKING, Final

from reportgen.model import ReasonKind

if TYPE_CHECKING:
    from reportgen.engine.applications import Reason

from reportgen import units

# Stamped by reportgen.pdf at the bottom right of every page after merging.
PAGE_LABEL: Final = "Page {page} of {pages}"
# The same, with the start of the report's digest (SHA-256 of its manifest) before it.
ARCHIVE_PAGE_LABEL: Final = "Digest {digest} \u00b7 Page {{page}} of {{pages}}"


def archive_page_label(short_digest: str) -> str:
    """The page stamp of an archive report: the digest's start, then "Page X of Y"."""
    return ARCHIVE_PAGE_LABEL.format(digest=short_digest)


TEXT: Final[Mapping[str, str]] = MappingProxyType({
    # document
    "document_kind": "Fiber link acceptance record",
    "generated": "Prepared {date} with reportgen {version}",
    "header_prefix": "Acceptance record",
    # cover
    "cover_heading": "Fiber link acceptance record",
    "field_project": "Project",
    "field_site": "Site",
    "field_customer": "Customer",
    "field_contractor": "Installer",
    "field_contact": "Contact",
    "field_job": "Job number",
    "field_dates": "Tested",
    "field_limits": "Limit set",
    "field_method": "Reference method",
    "field_directions": "Directions",
    "field_uncertainty": "Measurement uncertainty",
    "not_given": "not given",
    "no_results_dates": "no results recorded",
    "dates_range": "{first} to {last}",
    "totals_heading": "Outcome",
    "totals_links": "links",
    "totals_pass": "pass",
    "totals_fail": "fail",
    "totals_incomplete": "incomplete",
    "overall_empty": "The project lists no links.",
    "overall_all_pass": "Every one of the {links} links meets the limit set on every required result.",
    "overall_not_ready": (
        "{pass_} of {links} links meet the limit set; failing: {fail}; incomplete (required "
        "results missing): {incomplete}. The work is not ready for acceptance until these "
        "are resolved (see \u201cLinks needing action\u201d)."
    ),
    "overall_blocked": (
        "Every one of the {links} links meets the limit set on every required result, but audit "
        "findings of severity error ({errors}) block acceptance until they are resolved (see "
        "\u201cLinks needing action\u201d)."
    ),
    "overall_errors_too": "Audit findings of severity error ({errors}) also block acceptance.",
    "findings_heading": "Audit findings",
    "findings_intro": "Checks of the records beyond the loss limit (rules and thresholds in the appendix).",
    "findings_count_error": "errors: block acceptance",
    "findings_count_warning": "warnings: to review",
    "findings_count_note": "notes",
    "severity_error": "error",
    "severity_warning": "warning",
    "severity_note": "note",
    "mark_sev_error": "\u25a0",
    "mark_sev_warning": "\u25c7",
    "mark_sev_note": "\u00b7",
    "findings_none_link": "No audit findings for this link.",
    "sheet_errors": "audit findings blocking acceptance: {count}",
    "findings_project": "Whole project",
    "col_severity": "Severity",
    "col_finding": "Finding",
    "col_evidence": "Evidence",
    "evidence_lines": "{file} line {lines}",
    "evidence_lines_more": "{file} lines {lines} \u2026 ({more} more)",
    "evidence_setting": "project.yaml",
    "inspections_heading": "End-face inspections",
    "inspections_passed": "Strand ends inspected once and passing, without picture or note: {count} ({first} to {last}; criteria: {criteria}). The table lists the others: failures, pictures, notes and repeated inspections.",
    "col_end": "End",
    "col_inspection": "Result",
    "col_criteria_note": "Criteria; note",
    "col_picture": "Picture",
    "inspection_pass": "pass",
    "inspection_fail": "FAIL",
    "end_a": "A",
    "end_b": "B",
    "audit_heading": "Audit rules and thresholds",
    "audit_intro": (
        "Each rule gives at most one finding per link (or per instrument or reference for the "
        "whole project). Severity error blocks acceptance; a warning asks for review; a note "
        "informs. Thresholds are set under testing.audit in project.yaml; the value used here "
        "is shown with the default when it differs."
    ),
    "audit_references_given": "Reference records (references/) were given: the reference rules were applied.",
    "audit_references_absent": "No reference records (references/) were given: the reference rules were not applied.",
    "audit_inspections_given": "End-face inspection records (inspections/) were given: the inspection rules were applied.",
    "audit_inspections_absent": "No end-face inspection records (inspections/) were given: the inspection rules were not applied.",
    "col_rule": "Rule",
    "col_checks": "What it checks",
    "col_thresholds": "Thresholds",
    "col_basis": "Basis",
    "col_found": "Found",
    "threshold_default": "default {value}",
    "signoff_heading": "Acceptance",
    "signoff_intro": (
        "Signed for the parties below: the links listed in this record were tested as described "
        "and the results are reproduced without alteration."
    ),
    "signoff_contractor": "For the installer",
    "signoff_customer": "For the customer",
    "signoff_name": "Name",
    "signoff_role": "Position",
    "signoff_signature": "Signature",
    "signoff_date": "Date",
    # contents
    "contents_heading": "Contents",
    "contents_page": "page",
    # needs action
    "action_heading": "Links needing action",
    "action_none": "None: every link passes.",
    "action_intro": (
        "These links fail, lack required results or have audit findings of severity error. "
        "Failing links come first, then incomplete ones, then links held only by findings."
    ),
    "action_none_findings": "None: every link passes and no audit finding blocks acceptance.",
    "action_fail_item": "strand {strand}, {wavelength} nm, {direction}: loss {loss} dB over the {limit} dB limit (margin {margin} dB)",
    "action_missing_item": "strand {strand}, {wavelength} nm, {direction}: {reason}",
    "action_more": "\u2026 and {count} more on the link\u2019s sheet",
    # register (summary table)
    "register_heading": "Link register",
    "register_errors": "audit findings block acceptance",
    "register_errors_key": "{mark} after the verdict: audit findings of severity error block acceptance of the link (see its sheet).",
    "register_intro": "Every link in the order of the link list. Worst margin is the smallest margin of the judged results.",
    "col_link": "Link",
    "col_ends": "From \u2192 to",
    "col_fiber": "Fiber",
    "col_length": "Length",
    "col_strands": "Strands",
    "col_worst": "Worst margin",
    "col_verdict": "Verdict",
    "col_page": "Page",
    "col_strand": "Strand",
    "col_wavelength": "\u03bb nm",
    "col_direction": "Dir.",
    "col_loss": "Loss dB",
    "col_limit": "Limit dB",
    "col_margin": "Margin dB",
    "col_flags": "Notes",
    "col_technician": "Technician",
    "col_instrument": "Instruments",
    "col_time": "Tested",
    "col_reason": "Why not judged",
    "col_source": "Source",
    "col_item": "Item",
    "col_quantity": "Quantity",
    "col_allowance": "Allowance",
    "col_loss_allowed": "Allowed dB",
    "no_margin": "\u2014",
    # charts
    "charts_heading": "Margins at a glance",
    "charts_intro": (
        "Each mark is one judged result; its height is its margin to the limit (above the "
        "limit line: within the limit). Within each column the results are sorted, smallest "
        "margin on the left. Filled triangles mark results over the limit."
    ),
    "chart_margin_axis": "margin to limit [dB]",
    "chart_margin_title": "Margins by fiber type and wavelength",
    "chart_zero": "limit",
    "chart_no_results": "no judged results",
    "chart_counts_title": "Links by verdict",
    "chart_counts_axis": "links",
    # link sheet
    "links_heading": "Link sheets",
    "link_heading": "Link {link_id}",
    "link_definition": "Definition",
    "field_ends": "Ends",
    "field_end_a": "End A",
    "field_end_b": "End B",
    "field_fiber": "Fiber type",
    "field_plant": "Cable construction",
    "field_length": "Documented length",
    "field_strands": "Strands",
    "field_connections": "Connections between the ends",
    "field_splices": "Splices",
    "field_components": "Components",
    "field_applications": "Applications",
    "field_transceiver": "Transceiver",
    "field_notes": "Notes",
    "none": "none",
    "plant_inside": "inside plant",
    "plant_outside": "outside plant (incl. indoor-outdoor)",
    "link_kind": "Link sheet",
    "worst_margin_label": "worst margin",
    "judged_count": "{judged} results judged",
    "budget_heading": "Allowed loss, term by term",
    "budget_intro": "Limit = fiber + connections + splices + components, with the end connections the {method} reference leaves in the measurement.",
    "budget_wavelength": "{wavelength} nm",
    "budget_total": "Limit",
    "term_fiber": "Fiber",
    "term_end-connections": "End connections (reference method)",
    "term_connections": "Connections between the ends",
    "term_splices": "Splices",
    "term_component": "Component {item}",
    "unit_km": "km",
    "unit_each": "each",
    "unit_db_per_km": "dB/km",
    "results_heading": "Measured results",
    "results_none": "No valid result was recorded for this link.",
    "set_aside_heading": "Results set aside",
    "set_aside_superseded": "replaced by a later test of the same strand, \u03bb and direction",
    "set_aside_invalid": "negative loss beyond the uncertainty: the reference was bad; repeat the test",
    "missing_heading": "Required results not available",
    "missing_not-tested": "not tested",
    "missing_invalid": "the latest test was invalid (negative loss)",
    "direction_ab": "A\u2192B",
    "direction_ba": "B\u2192A",
    "direction_any": "either",
    "source_row": "{file} line {line}",
    "source_sheet_row": "{file}, sheet {sheet}, row {line}",
    "diagram_heading": "Loss build-up",
    "diagram_caption": (
        "Steps: the loss the limit set allows, added up along the link (positions not to scale). "
        "Right: every judged result per wavelength against its limit bar. "
        "\u25cb within the limit, \u25b2 over the limit."
    ),
    # verdict words (the contract's values; shown with a mark and a style of their own)
    "verdict_pass": "pass",
    "verdict_fail": "fail",
    "verdict_incomplete": "incomplete",
    "verdict_invalid": "invalid",
    "verdict_superseded": "superseded",
    "verdict_not-judged": "not judged",
    "mark_not-judged": "\u25c7",
    "mark_pass": "\u25cb",
    "mark_fail": "\u25b2",
    "mark_incomplete": "\u25cc",
    "mark_invalid": "\u00d7",
    "mark_superseded": "\u2013",
    # flags
    "flag_within-uncertainty": "within uncertainty of the limit",
    "flag_negative-loss": "negative loss",
    "flag_retest": "retest",
    "flag_calibration-overdue": "instrument past calibration",
    "flag_not-required": "wavelength not required",
    "flag_no-cabling-limit": "for the applications only (no cabling limit at this \u03bb)",
    # diagram labels
    "dg_end": "end",
    "dg_fiber": "fiber",
    "dg_splice": "spl.",
    "dg_connection": "conn.",
    "dg_component": "part",
    "dg_axis": "dB",
    "dg_start": "A",
    "dg_finish": "B",
    "dg_limit": "limit {value}",
    "dg_results": "results",
    # applications and transceiver power (link sheet, project section, appendix)
    "verdict_supported": "supported",
    "verdict_not-supported": "not-supported",
    "verdict_untested": "untested",
    "verdict_supported-within": "supported, within uncertainty",
    "mark_supported-within": "\u25d0",
    "verdict_ok": "ok",
    "verdict_too-weak": "too-weak",
    "verdict_too-strong": "too-strong",
    "verdict_no-fit": "no-fit",
    "mark_supported": "\u25cf",
    "mark_not-supported": "\u2715",
    "mark_untested": "\u25cc",
    "mark_ok": "\u25ce",
    "mark_too-weak": "\u2193",
    "mark_too-strong": "\u2191",
    "mark_no-fit": "\u21c8",
    "cell_not-listed-not-supported": "\u00b7",
    "link_apps_heading": "Applications on this link",
    "link_apps_intro": (
        "Each application listed for the link, checked for {fiber_type} against its "
        "maximum channel loss and length. Worst loss: the highest judged loss over every strand "
        "and direction at the wavelengths the application needs."
    ),
    "link_apps_end_allowance": (
        "The {method} reference leaves {count} of the 2 end connections out of the measured "
        "loss; a working channel has them. {added} dB ({count} \u00d7 {connection} dB, the limit set\u2019s "
        "connection allowance) is therefore added to the worst loss before it is compared with a "
        "maximum (channel loss, receive minimum); minimums (PON class minimum, overload) use the "
        "loss as measured."
    ),
    "link_apps_none": "No application is listed for this link.",
    "apps_worst_plus": "{worst} + {added} = {checked}",
    "apps_all_met_link_fails": "loss within the channel allowance; link fails its cabling limit",
    "apps_within_uncertainty": "within {value} dB of a limit: the measurement cannot tell on which side",
    "apps_no_reach": "none set",
    "apps_transceiver_differs": (
        "{application} and transceiver {transceiver} disagree. The application allows {channel} dB "
        "of channel loss on {fiber_type}; the optic\u2019s power window allows {window} dB (its "
        "lowest launch power, {tx_min} dBm, less its receive minimum, {rx_min} dBm). Whether this "
        "optic works is decided by its power window, below; the application verdict above judges "
        "the cabling against the standard\u2019s channel."
    ),
    "col_application": "Application",
    "col_needs": "Tested at \u03bb nm",
    "col_max_channel": "Channel loss allowed dB",
    "col_worst_loss": "Worst loss dB",
    "col_max_length": "Max. length",
    "col_why": "Reasons",
    "apps_loss_window": "{low} to {high}",
    "apps_pon_least": "least {value}",
    "apps_all_met": "every check met",
    "apps_capable_label": "Supported as measured (every application in the table):",
    "apps_capable_none": "none of the table\u2019s applications",
    # why an application is not supported (or untested) on a link, by reason kind
    # (reportgen.model.ReasonKind); see reason_text for the fields
    "reason_fiber-type-not-specified": "fiber type {fiber_type} not specified for {application}",
    "reason_too-long": "too long: {value} m documented, {limit} m allowed on {fiber_type}",
    "reason_too-much-loss": "too much loss at {wavelength_nm} nm: {value} dB measured, {limit} dB allowed",
    "reason_too-much-loss-added": (
        "too much loss at {wavelength_nm} nm: {value} dB measured + {added} dB for the end "
        "connections the reference left out = {checked} dB, {limit} dB allowed"),
    "reason_too-little-loss": "too little loss at {wavelength_nm} nm: {value} dB measured, class minimum {limit} dB",
    "reason_untested": "untested at {wavelength_nm} nm: no judged result",
    "power_heading": "Transceiver power budget",
    "field_basis": "Loss basis",
    "basis_measured": "measured \u2013 the lowest and highest judged loss of this link at {wavelength} nm, over every strand and direction",
    "basis_budget": "budget \u2013 no judged result yet, so the link\u2019s limit at {wavelength} nm stands for both the lowest and the highest loss; confirm by testing",
    "field_power_wavelength": "Wavelength used",
    "power_wavelength_same": "{wavelength} nm, the optic\u2019s own",
    "power_wavelength_nearest": "{wavelength} nm: the optic runs at {own} nm; the nearest wavelength with losses was used",
    "field_loss_used": "Loss used",
    "power_loss_range": "{least} to {worst} dB",
    "field_launch": "Launch power",
    "field_received": "Received power",
    "power_dbm_range": "{low} to {high} dBm",
    "power_received_how": "({tx_min} \u2212 {worst}) to ({tx_max} \u2212 {least})",
    "power_received_how_added": "({tx_min} \u2212 ({worst} + {added} end allowance)) to ({tx_max} \u2212 {least})",
    "field_receiver_window": "Receiver window",
    "power_receiver_window": "{rx_min} dBm (lowest average receive power) to {overload} dBm (overload)",
    "field_margin_low": "Margin above receive minimum",
    "field_headroom_high": "Headroom below overload",
    "power_margin_how": "weakest case: lowest received power \u2212 receive minimum",
    "power_headroom_how": "strongest case: overload \u2212 highest received power",
    "field_power_verdict": "Outcome",
    "power_says_ok": "Both the weakest and the strongest case fall inside the receiver window.",
    "power_says_too-weak": (
        "The weakest case is {short} dB below the receive minimum. An attenuator cannot help: bring the "
        "link loss down (clean, re-terminate, remove a connection) or use an optic with a larger "
        "power budget."
    ),
    "power_says_too-strong": (
        "The strongest case is {excess} dB above the overload level. Fit a {attenuator} dB "
        "attenuator at the receiver; received power is then {low} to {high} dBm, inside the window."
    ),
    "power_says_no-fit": (
        "The strongest case is {excess} dB above the overload level, and no attenuator on the "
        "project\u2019s list ({offered} dB) brings it down while keeping the weakest case at or "
        "above the receive minimum. Choose a different optic."
    ),
    "power_attenuator_label": "Recommended attenuator",
    "power_diagram_caption": (
        "Solid line, round marks: highest level (maximum launch power, least loss). Dashed line, "
        "square marks: lowest level (minimum launch power, worst loss). Hatched band: receiver "
        "window. The loss is shared among the parts in proportion to the loss budget "
        "(schematic); the end values are exact."
    ),
    "apps_heading": "Applications and optics",
    "apps_intro": (
        "Which network applications each link carries as measured, and whether the optics planned "
        "for the links receive a usable level. Rules and sources are in the appendix."
    ),
    "power_list_heading": "Transceiver power budgets",
    "power_list_intro": "Links fitted with a transceiver; those receiving too little or too much light come first.",
    "power_list_none": "No link names a transceiver.",
    "power_list_ok_unlisted": "A further {count} links with a transceiver are ok: both cases inside the receiver window (see each link\u2019s sheet).",
    "col_transceiver": "Transceiver",
    "col_received": "Received dBm",
    "col_margin_low": "Margin dB",
    "col_headroom": "Headroom dB",
    "col_attenuator": "Attenuator dB",
    "matrix_heading": "Applications by link",
    "matrix_intro": (
        "One table per fiber type: its links against every application one of them lists or would "
        "support as measured. Framed cells are the applications listed for the link; "
        "unframed grey cells are what the link would also carry."
    ),
    "matrix_group": "{fiber_type} links",
    "matrix_group_continued": "{fiber_type} links (continued)",
    "matrix_none": "No link lists or would support an application of the table.",
    "legend_listed": "listed",
    "legend_capable": "not listed",
    "legend_dot": "not supported, not listed",
    "appx_apps_heading": "Applications and power budgets: rules and sources",
    "appx_apps_worst": (
        "Applications. For each wavelength an application needs, the highest judged loss over "
        "every strand and direction of the link (worst loss) is compared with the maximum channel "
        "loss for the link\u2019s fiber type, and the documented length with the maximum length. "
        "Any failed check makes the application not-supported, with every reason listed; a needed "
        "wavelength without a judged result leaves it untested. With a two- or three-cord "
        "reference the measured loss lacks one or both end connections; the limit set\u2019s "
        "connection allowance for each is added to the worst loss before the maximum is checked "
        "(IEC 61280-4-1 / -4-2 reference methods). A compared loss within the measurement "
        "uncertainty of its limit is marked \u201cwithin uncertainty\u201d."
    ),
    "appx_apps_pon": (
        "PON loss classes also set a minimum: the lowest judged loss at each needed wavelength, as "
        "measured, must not fall below the class minimum, or the receivers may be overloaded. Each "
        "class is checked at the wavelengths its standard names (GPON, ITU-T G.984.2: 1310 and "
        "1490 nm; XG-PON and XGS-PON, G.987.2 / G.9807.1: 1270 and 1577 nm). Results at those "
        "wavelengths have no cabling limit: they are shown as not judged and count only here."
    ),
    "appx_apps_power": (
        "Transceiver power. Received power = launched power \u2212 link loss (common practice). "
        "The received power lies in the window [tx_min \u2212 (worst loss + end allowance), "
        "tx_max \u2212 least loss], using the judged losses at the tested wavelength nearest the optic\u2019s (basis "
        "measured) or, when the link has no judged result, its limit (basis budget). Margin = "
        "lowest received power \u2212 receive minimum; headroom = overload \u2212 highest received "
        "power. Verdicts: ok; too-weak (margin below zero); too-strong (headroom below zero, an "
        "attenuator fits); no-fit (too strong and none fits)."
    ),
    "appx_apps_attenuator": (
        "Attenuator: the smallest value from the project\u2019s list of attenuators ({offered} dB) "
        "that brings the highest received power to or below the overload level while keeping the "
        "lowest at or above the receive minimum."
    ),
    "appx_apps_table_intro": "Rows of the built-in application table used in this record: the applications shown, for the fiber types of this project.",
    "appx_apps_status": (
        "Status: \u201cchecked against a published reproduction of the table\u201d = the value was "
        "read in a public source reproducing the standard\u2019s table; \u201cworked out from "
        "checked values\u201d = arithmetic on such values or a stated rule; \u201cnot checked "
        "against the standard\u2019s text\u201d = the value has not been compared with the "
        "standard\u2019s own text: confirm it with your copy before relying on a verdict near it."
    ),
    "col_family": "Family",
    "col_fiber_types": "Fiber types",
    "col_loss_window": "Channel loss dB",
    "col_status": "Status",
    "apps_max_only": "\u2264 {high}",
    # appendix
    "appendix_heading": "Appendix",
    "archive_intro": ("A copy of each of these files, of results.csv and summary.json, and a "
                      "manifest listing every file with its size and SHA-256 (manifest.json) are "
                      "attached to this PDF (open your PDF reader's attachment list). The "
                      "report's digest, {digest}, printed on the cover and at the foot of every "
                      "page, is the SHA-256 of that manifest; 'reportgen verify' checks all of "
                      "this and judges the attached measurements again."),
    "archive_not_embedded": ("Not attached, being over the size cap for OTDR trace files "
                             "(project.yaml, report.embed_otdr_file_mb and "
                             "report.embed_otdr_total_mb): {count} file(s), {files}. The manifest "
                             "lists them with their size and SHA-256; 'reportgen verify --project' "
                             "checks them against the project folder."),
    "field_digest": "Report digest",
    "signoff_digital": "Digital signature of this PDF file (signed copies only; 'reportgen verify' checks it)",
    "signed_by": "Signed digitally by {signer} when this file was made.",
    "digest_note": "SHA-256 of the manifest of the files inside this PDF",
    "instruments_heading": "Test instruments",
    "files_heading": "Input files",
    "files_intro": (
        "The files of the project folder this report was made from, with their size and SHA-256 "
        "checksum: a file whose checksum is the same is the same file, byte for byte. The last "
        "columns count the results and links each file gave; every result on a link sheet names "
        "its file and line (or sheet and row)."),
    "col_file": "File",
    "col_size_bytes": "Size (bytes)",
    "col_sha256": "SHA-256",
    "col_results": "Results",
    "col_links": "Links",
    "instruments_none": "No instruments are listed for this project.",
    "col_id": "Id",
    "col_kind": "Kind",
    "col_model": "Model",
    "col_serial": "Serial",
    "col_due": "Calibration due",
    "col_used": "Used",
    "col_cal_state": "State at use",
    "cal_ok": "in calibration",
    "cal_overdue": "PAST DUE when used",
    "cal_unknown": "no due date given",
    "cal_unused": "not named by any result",
    "kind_light-source": "light source",
    "kind_power-meter": "power meter",
    "kind_otdr": "OTDR",
    "kind_test-cord": "test cord",
    "kind_other": "other",
    "technicians_heading": "Technicians",
    "technicians_none": "No technicians are listed.",
    "technician_results": "{count} results",
    "method_heading": "Test method",
    "method_intro": (
        "Insertion loss was measured with a light source and a power meter after setting a "
        "reference. The reference method decides which end connections the measured loss "
        "contains; the limit counts exactly those."
    ),
    "method_one-cord": "one-cord reference: both end connections are inside the measured loss (limit counts 2 end connections)",
    "method_two-cord": "two-cord reference: one end connection is inside the measured loss (limit counts 1 end connection)",
    "method_three-cord": "three-cord reference: neither end connection is inside the measured loss (limit counts none)",
    "method_source": "Reference methods as described in IEC 61280-4-1 (multimode) and IEC 61280-4-2 (single-mode).",
    "method_wavelengths": "Required wavelengths: multimode {multimode} nm; single-mode {singlemode} nm.",
    "method_directions_both": "Each strand is tested in both directions, A\u2192B and B\u2192A.",
    "method_directions_one": "Each strand is tested in one direction.",
    "method_uncertainty": "Results within \u00b1{value} dB of their limit are marked \u201cwithin uncertainty\u201d; they still pass or fail on the measured value.",
    "method_judging": (
        "Limit = \u03b1\u00b7L + (connections + E)\u00b7connection allowance + splices\u00b7splice "
        "allowance + \u03a3 component losses; margin = limit \u2212 loss. A result passes when "
        "loss \u2264 limit. A link fails when any judged result fails, is incomplete when a "
        "required result is missing or invalid, and passes otherwise. When a result was "
        "repeated, the latest test is judged and earlier ones are shown as superseded."
    ),
    "limits_heading": "Limit set and sources",
    "limits_status_intro": (
        "Status says how each value was checked: against a published reproduction of the "
        "standard\u2019s table, or not yet against the standard\u2019s text (confirm those with "
        "your copy of the standard)."
    ),
    "status_none": "as stated by the source named",
    "cover_values_confirmed": "Every published value this report uses was checked against a published reproduction of its standard\u2019s table (see the appendix).",
    "cover_values_unconfirmed": "{count} of the published values this report uses are not yet checked against the standard\u2019s text; the appendix lists each value and its status.",
    "limits_id": "Identifier",
    "limits_origin": "Origin",
    "limits_connection": "Mated connection allowance",
    "limits_splice": "Splice allowance",
    "limits_table_all": "all",
    "limits_table_inside": "inside plant",
    "limits_table_outside": "outside plant",
    "col_table": "Construction",
    "col_alpha": "Attenuation dB/km",
    "components_heading": "Component catalogue",
    "components_source": "loss stated for the part in this project\u2019s component catalogue",
    "safety_heading": "Safety",
    "glossary_heading": "Terms used",
    "footer_left": "{title}",
    # OTDR results on a link sheet
    "otdr_heading": "OTDR: events along the fiber",
    "otdr_strand": "Strand {strand}, {wavelength} nm",
    "otdr_length": "Fiber length measured {measured}, documented {documented} (allowed difference {tolerance}).",
    "otdr_length_missing": "The trace shows no fiber end: length not measured.",
    "otdr_total": "End-to-end loss by the instrument: {value} dB.",
    "otdr_files": "Source: {files}",
    "otdr_caption": "Both directions on one distance axis from end A (from B mirrored); each vertical stroke spans the lowest and highest sample of its pixel column, so narrow reflections stay visible. Diamond: connection; circle: splice; square: other event; filled: fails.",
    "col_event_no": "No.",
    "col_position": "Position",
    "col_event": "Event",
    "col_loss_ab": "Loss A→B",
    "col_loss_ba": "Loss B→A",
    "col_loss_avg": "Average",
    "col_lsa": "Re-measured (LSA)",
    "col_reflectance": "Reflectance",
    "col_allowance_short": "Allowed",
    "otdr_kind_launch": "launch",
    "otdr_kind_connector": "connection",
    "otdr_kind_splice": "splice",
    "otdr_kind_bend": "bend",
    "otdr_kind_reflective": "reflective event",
    "otdr_kind_end": "fiber end",
    "otdr_kind_other": "other",
    "otdr_flag_negative-average": "negative average",
    "otdr_flag_one-way": "seen from one end only",
    "otdr_flag_in-cord": "inside a test cord",
    "otdr_flag_lsa-differs": "trace disagrees with the instrument's table",
    "otdr_finding_length-differs": "The measured fiber length differs from the documented length by more than allowed.",
    "otdr_finding_connection-count": "The number of connections found differs from the link's description.",
    "otdr_finding_splice-count": "The number of splices found differs from the link's description.",
    "otdr_finding_il-differs": "The OTDR end-to-end loss differs from the insertion-loss result ({value} dB) by more than 0.5 dB.",
})

GLOSSARY: Final[tuple[tuple[str, str], ...]] = (
    ("insertion loss", "The drop in optical power, in dB, that a link causes between a source and a meter."),
    ("dB", "Decibel: ten times the base-10 logarithm of a power ratio. Losses in dB add along a link."),
    ("dBm", "Optical power relative to one milliwatt: 0 dBm = 1 mW, \u221210 dBm = 0.1 mW."),
    ("limit", "The largest insertion loss the limit set allows for this link at a wavelength."),
    ("margin", "Limit minus measured loss. Positive: room to spare; negative: over the limit."),
    ("reference method", "How the meter was zeroed before testing (one-, two- or three-cord); it decides which end connections the result includes."),
    ("mated connection", "Two connectors joined in an adapter; each has an allowance in the limit set."),
    ("splice", "A permanent joint of two fibers, fused or mechanical."),
    ("strand", "One fiber of a link, numbered from 1."),
    ("OTDR", "Optical time-domain reflectometer: shows loss and reflections along a fiber from one end."),
    ("reflectance", "The share of light a connection sends back, in dB: the more negative, the better."),
    ("bidirectional average", "The mean of an event's losses measured from both ends; it cancels the apparent gain or extra loss where two fibers of slightly different backscatter meet."),
    ("LSA", "Least-squares approximation: straight lines fitted to the trace before and after an event; the step between them is the event's loss."),
    ("OM1\u2013OM5, OS1, OS1a, OS2", "Multimode (OM) and single-mode (OS) fiber categories of ISO/IEC 11801."),
    ("within uncertainty", "A result closer to its limit than the stated measurement uncertainty."),
    ("superseded", "An earlier test of the same strand, wavelength and direction, replaced by a later one."),
    ("channel loss", "The insertion loss an application allows between its transmitter and receiver, connections included."),
    ("power budget", "Launch power minus link loss, compared with the receiver\u2019s window from its lowest average receive power (weakest usable) to overload (strongest tolerated)."),
    ("end allowance", "The allowance of the end connections a two- or three-cord reference leaves out of the measured loss, added before an application\u2019s maximum channel loss is checked."),
    ("attenuator", "A passive part that adds a fixed loss, fitted at the receiver when the light would otherwise be too strong."),
    ("SHA-256", "A checksum computed from every byte of a file (FIPS 180-4): a copy with the same checksum is the same file; any change gives a different one."),
)

SAFETY: Final[tuple[str, ...]] = (
    "Light at 850, 1300, 1310, 1490, 1550 and 1625 nm is invisible: seeing no light does not mean there is no power. Never look into a fiber end or a connector, directly or through an unfiltered microscope.",
    "Inspect end faces with a filtered or video inspection scope; confirm a fiber is dark with a power meter. Cap every unused connector and adapter.",
    "Laser sources are classified under IEC 60825-1 (classes 1, 1M, 2, 2M, 3R, 3B, 4). IEC 60825-2 assigns hazard levels to locations in a fiber network (unrestricted up to 2M, restricted up to 3R, controlled up to 3B).",
    "Fiber offcuts and shards pierce skin and are hard to see: collect them in a marked, closed container; no food or drink at the work area.",
    "These notes do not replace local regulations, the site\u2019s laser safety rules, the applicable standards or licensed practice; follow those first.",
)


# ---------------------------------------------------------------- audit findings

# One line per finding, worded from Finding.values (reportgen.engine.findings). summary.json
# carries the same line. Placeholders ending _db are dB (2 decimals), _m metres, _h hours.
FINDING_TEXT: Final[Mapping[str, str]] = MappingProxyType({
    "calibration-overdue": "Used after its calibration due date: {instruments}, for {results} (last use {last_use}).",
    "calibration-unknown": "Instrument {instrument} is named by results but has no calibration due date in project.yaml.",
    "result-in-future": "Dated after the report date {today}: {results} (latest {last}).",
    "result-before-work": "Dated before the work started on {started}: {results} (earliest {first}).",
    "result-outside-period": "Dated outside the test period {start} to {end}: {results} ({first} to {last}).",
    "retest-order": "Dated before an earlier row of the same result in {file}: {rows} (first at line {line}); a retest cannot be older than what it replaces.",
    "ambiguous-retest": "Two rows with the same time and different losses ({low_db} to {high_db} dB): {results}; which is the retest cannot be told.",
    "reference-method": "Reference method {used} was used; {required} is required.",
    "application-not-supported": "Listed application not supported as measured: {applications}.",
    "transceiver-too-weak": "Transceiver {transceiver}: the weakest received power is {shortfall_db} dB below the receiver\u2019s minimum.",
    "transceiver-no-fit": "Transceiver {transceiver}: the received power is too strong and no attenuator of testing.attenuators_db fits.",
    "transceiver-too-strong": "Transceiver {transceiver}: the strongest received power is {excess_db} dB above overload; fit a {attenuator_db} dB attenuator.",
    "within-uncertainty": "Within the measurement uncertainty of the limit: {results} (smallest margin {worst_margin_db} dB).",
    "direction-asymmetry": "A\u2192B and B\u2192A differ by more than {threshold_db} dB: {pairs} (largest difference {worst_db} dB).",
    "implausibly-low-loss": "Below the least loss the link can have: {results} (lowest {least_loss_db} dB, least plausible {bound_db} dB); check the reference.",
    "repeated-readings": "Identical readings of {loss_db} dB at one wavelength: {results}; {count} or more are unlikely.",
    "repeated-readings-technician": "Identical readings of {loss_db} dB in a row by {technician}: {results}; {count} or more are unlikely.",
    "length-implausible": "Documented length {length_m} m is under {minimum_m} m, implausible for {plant} cable: check the unit (km written as m?).",
    "length-mismatch": "Measured length {measured_m} m differs from the documented {documented_m} m by {difference_m} m (allowed {allowed_m} m; {results} off).",
    "reference-missing": "No reference of the power meter at the wavelength set before the test: {results}.",
    "reference-stale": "Measured more than {max_age_h} h after the meter\u2019s reference: {results} (oldest {age_h} h).",
    "cords-not-verified": "Reference of {instrument} at {wavelength_nm} nm set {set_at}: test cords {cords} not verified ({results} rest on it).",
    "cords-over-limit": "Reference of {instrument} at {wavelength_nm} nm set {set_at}: test cord check {cord_check_db} dB is over {max_db} dB ({results} rest on it).",
    "inspection-failed": "The latest end-face inspection failed at {ends}.",
    "inspection-missing": "No end-face inspection recorded at {ends}.",
})

# What each rule checks and the basis of its thresholds (appendix; docs/project-format.md
# "Audit findings" gives the same sources).
RULE_TEXT: Final[Mapping[str, tuple[str, str]]] = MappingProxyType({
    "calibration-overdue": ("A judged result made with an instrument after its calibration due date.", "Calibration due dates in project.yaml instruments."),
    "result-in-future": ("A result dated more than a day after the day the report was made (a day allows for time zones).", "Cannot happen: a date or clock error."),
    "result-before-work": ("A result dated before project.work_started.", "Cannot belong to this installation."),
    "retest-order": ("In one file, a row dated before an earlier row of the same strand, wavelength and direction.", "A retest cannot be older than what it replaces."),
    "ambiguous-retest": ("Two rows of one result with the same time and different losses.", "Which row is the retest cannot be told."),
    "reference-method": ("The reference method differs from testing.required_reference_method, or a reference record states another method.", "The customer\u2019s specification; the limit counts the end connections of the method used."),
    "application-not-supported": ("A listed application the link does not support as measured.", "The application table (appendix)."),
    "transceiver-too-weak": ("The transceiver\u2019s weakest received power is below its receive minimum, or it is too strong and no attenuator fits.", "The transceiver catalogue in project.yaml."),
    "inspection-failed": ("The latest end-face inspection of a strand at a link end failed.", "Inspection records; criteria as recorded (e.g. IEC 61300-3-35)."),
    "transceiver-too-strong": ("The transceiver\u2019s strongest received power is above overload; an attenuator fits.", "The transceiver catalogue in project.yaml."),
    "within-uncertainty": ("A judged result closer to its limit than testing.uncertainty_db.", "The stated measurement uncertainty."),
    "result-outside-period": ("A result dated outside testing.period.", "The test period of project.yaml."),
    "direction-asymmetry": ("|A\u2192B \u2212 B\u2192A| of one strand and wavelength above asymmetry_db.", "Common practice: unlike connector pairs at the two ends make the directions differ a little; more than about 0.5 dB points to a dirty or damaged end face or a reference problem."),
    "implausibly-low-loss": ("A judged result below the least loss the link can have, by more than the uncertainty: fiber length \u00d7 rayleigh_db_um4_per_km / \u03bb[\u00b5m]\u2074 + mated connections in the measurement \u00d7 low_loss_connection_db.", "Recalled, not checked against a published source: Rayleigh scattering of silica fiber is about 0.7\u20130.9 dB/km at 1 \u00b5m, falling as 1/\u03bb\u2074 (0.12 dB/km at 1550 nm with 0.7); common practice: even reference-grade connector pairs lose a few hundredths of a dB. Suggests a wrong reference or a meter referenced through the link."),
    "repeated-readings": ("repeat_count or more judged results of one link and wavelength with the same loss to 0.01 dB, or that many in a row by one technician.", "Derived: readings scatter by a few hundredths of a dB (common practice), so one repeat has a chance of about 1 in 5 or less and five repeats about 0.2\u2075 = 0.03 %."),
    "length-implausible": ("A documented length under min_length_inside_m or min_length_outside_m.", "Common practice: an outside-plant cable runs between buildings or to a cabinet; a length of a few metres is usually km written as m."),
    "length-mismatch": ("A measured length off the documented one by more than length_tolerance_percent of it plus length_tolerance_m.", "Common practice: fiber in a stranded cable is longer than the sheath (helix, about 0.5\u20133 %, recalled); slack loops, patching and the meter\u2019s index setting add the rest."),
    "reference-missing": ("A judged result without a reference of its power meter at its wavelength set before it (references/ present).", "IEC 61280-4-1 and -4-2: every measurement is made against a reference."),
    "reference-stale": ("A judged result measured more than reference_max_age_h after its reference.", "Common practice: set the reference at the start of each working day and whenever a test cord is changed."),
    "cords-not-verified": ("A reference in use whose test cords were not checked, or whose check read more than cord_check_max_db.", "IEC 61280-4-1 and -4-2 describe checking the test cords by mating them; the 0.2 dB limit is recalled, not checked against the standard\u2019s text: a reference-grade pair reads 0.1 to 0.2 dB or less."),
    "inspection-missing": ("A strand at a link end without any end-face inspection (inspections/ present).", "Common practice: inspect, and clean if needed, every end face before it is mated."),
    "calibration-unknown": ("An instrument named by results without a calibration due date.", "Calibration cannot be shown."),
})
# testing.audit keys as the appendix names them
THRESHOLD_UNIT: Final[Mapping[str, str]] = MappingProxyType({
    "asymmetry_db": "dB", "rayleigh_db_um4_per_km": "dB\u00b7\u00b5m\u2074/km",
    "low_loss_connection_db": "dB", "repeat_count": "", "min_length_inside_m": "m",
    "min_length_outside_m": "m", "length_tolerance_percent": "%", "length_tolerance_m": "m",
    "reference_max_age_h": "h", "cord_check_max_db": "dB",
})


def _finding_value(key: str, value: object) -> str:
    """A value of a finding's message: dB 2 decimals, metres and hours whole or 1 decimal,
    dates ISO, lists joined."""
    if value is None:
        return TEXT["not_given"]
    if key in ("results", "rows", "pairs"):
        noun = {"results": "result", "rows": "row", "pairs": "strand and wavelength pair"}[key]
        return f"{value} {noun}" + ("" if value == 1 else "s")
    if key == "ends":
        return ", ".join(f"strand {strand} end {end.upper()}" for strand, end in value)  # type: ignore[union-attr]
    if isinstance(value, tuple):
        return ", ".join(str(item) for item in value)
    if isinstance(value, float):
        if key.endswith("_db"):
            return units.format_db(value)
        return f"{value:.0f}" if abs(value - round(value)) < 0.05 else f"{value:.1f}"
    if hasattr(value, "year"):
        return format_date(value, with_time=True)
    return str(value)


def finding_text(finding) -> str:
    """The one-line message of a ``reportgen.engine.findings.Finding``."""
    values = dict(finding.values)
    key = finding.rule
    if key == "calibration-overdue":
        values["instruments"] = tuple(f"{name} (due {day.isoformat()})"
                                      for name, day in zip(values["instruments"], values["due"]))
    elif key == "transceiver-too-weak":
        if values.get("verdict") == "no-fit":
            key = "transceiver-no-fit"
        values["shortfall_db"] = -values["low_margin_db"]
    elif key == "transceiver-too-strong":
        values["excess_db"] = -values["high_margin_db"]
    elif key == "repeated-readings" and values.get("technician"):
        key = "repeated-readings-technician"
    elif key == "cords-not-verified" and values.get("cord_check_db") is not None:
        key = "cords-over-limit"
    elif key == "reference-missing" and not values.get("meters"):
        values["meters"] = ()
    shown = {name: _finding_value(name, value) for name, value in values.items()}
    return FINDING_TEXT[key].format(**shown)


def msg(key: str, /, **values: object) -> str:
    """The catalogue text ``key`` with its ``{placeholders}`` filled in."""
    return TEXT[key].format(**values)


# A value's status in the customer's words (the data's status vocabulary, DEVELOPERS.md).
STATUS_TEXT: Final[tuple[tuple[str, str], ...]] = (
    ("verified, secondary against the", "checked against a published reproduction of the"),
    ("verified, secondary", "checked against a published reproduction of the table"),
    ("from memory", "not checked against the standard\u2019s text: confirm with your copy"),
    ("derived", "worked out from checked values"),
    ("LOW confidence", "low confidence"),
)


def customer_status(status: str) -> str:
    """A data status ("verified, secondary", "from memory", "850 nm verified, secondary;
    1300 nm from memory") in words a customer understands; "" stays "" (no status given)."""
    text = status
    for word, meaning in STATUS_TEXT:
        text = text.replace(word, meaning)
    return text


def reason_text(reason: Reason) -> str:
    """Words for why an application is not supported (or untested) on a link.

    Fields: application, fiber_type, wavelength_nm, value and limit (whole metres for
    a length, two decimals for a loss in dB). summary.json carries the same text.
    """
    number = "{:.0f}".format if reason.kind is ReasonKind.TOO_LONG else units.format_db
    key = f"reason_{reason.kind.value}"
    if reason.kind is ReasonKind.TOO_MUCH_LOSS and reason.added_db:
        key = "reason_too-much-loss-added"
    return TEXT[key].format(
        application=reason.application, fiber_type=reason.fiber_type,
        wavelength_nm=reason.wavelength_nm,
        value=None if reason.value is None else number(reason.value),
        limit=None if reason.limit is None else number(reason.limit),
        added=units.format_db(reason.added_db),
        checked=None if reason.checked is None else units.format_db(reason.checked))


# Number formats: every number the report prints goes through one of these (the
# templates use them as filters |db, |dbm, |length, |km, |date). dB values are rounded
# by reportgen.units.format_db, the rule results.csv and summary.json follow too.


def format_db(value: float | None) -> str:
    """A loss, limit or margin in dB with two decimals (units.format_db); a dash when none."""
    if value is None or value != value:
        return TEXT["no_margin"]
    return units.format_db(value)


def format_dbm(value: float | None) -> str:
    """An optical power in dBm with two decimals."""
    return format_db(value)


def format_length(length_m: float, unit: str = "m") -> str:
    """A length given in metres, shown in ``unit`` ("m" or "ft"), whole or one decimal."""
    from reportgen.units import m_to_ft

    value = m_to_ft(length_m) if unit == "ft" else length_m
    text = f"{value:.0f}" if abs(value - round(value)) < 0.05 else f"{value:.1f}"
    if text.startswith("-") and float(text) == 0:  # never "-0 m"
        text = text[1:]
    return f"{text}\u00a0{unit}"


def format_setting(value: float) -> str:
    """A threshold of project.yaml as written: 24, 0.5, 0.02 (no trailing zeros)."""
    return f"{value:g}"


def format_km(length_km: float) -> str:
    """A length in km with three decimals (metre resolution)."""
    return f"{length_km:.3f}"


def format_date(value: object, with_time: bool = False) -> str:
    """A date (or date-time) as ISO 8601: 2026-04-14 or 2026-04-14 08:40 (midnight: date only)."""
    if value is None:
        return TEXT["not_given"]
    if with_time and hasattr(value, "hour") and (value.hour, value.minute, value.second) != (0, 0, 0):
        return f"{value:%Y-%m-%d %H:%M}"
    return f"{value:%Y-%m-%d}"
