"""Words of the appendix: instruments, input files, test method, limit set and sources,
safety, the glossary, and a value's status in the customer's words.

Part of the report's catalogue (``reportgen.report.messages.TEXT`` joins it); marked for
translation with ``N_`` (reportgen/report/i18n.py).
"""
from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Final

from reportgen.report.i18n import ENGLISH, N_, Language

APPENDIX_TEXT: Final[Mapping[str, str]] = MappingProxyType({
    "appendix_heading": N_("Appendix"),
    "archive_intro": N_("A copy of each of these files, of results.csv and summary.json, and a "
                      "manifest listing every file with its size and SHA-256 (manifest.json) are "
                      "attached to this PDF (open your PDF reader's attachment list). The "
                      "report's digest, {digest}, printed on the cover and at the foot of every "
                      "page, is the SHA-256 of that manifest; 'reportgen verify' checks all of "
                      "this and judges the attached measurements again."),
    "archive_not_embedded": N_("Not attached, being over the size cap for OTDR trace files "
                             "(project.yaml, report.embed_otdr_file_mb and "
                             "report.embed_otdr_total_mb): {count} file(s), {files}. The manifest "
                             "lists them with their size and SHA-256; 'reportgen verify --project' "
                             "checks them against the project folder."),
    "field_digest": N_("Report digest"),
    "signoff_digital": N_("Digital signature of this PDF file (signed copies only; 'reportgen verify' checks it)"),
    "signed_by": N_("Signed digitally by {signer} when this file was made."),
    "digest_note": N_("SHA-256 of the manifest of the files inside this PDF"),
    "instruments_heading": N_("Test instruments"),
    "files_heading": N_("Input files"),
    "files_intro": N_(
        "The files of the project folder this report was made from, with their size and SHA-256 "
        "checksum: a file whose checksum is the same is the same file, byte for byte. The last "
        "columns count the results and links each file gave; every result on a link sheet names "
        "its file and line (or sheet and row)."),
    "col_file": N_("File"),
    "col_size_bytes": N_("Size (bytes)"),
    "col_sha256": "SHA-256",
    "col_results": N_("Results"),
    "col_links": N_("Links"),
    "instruments_none": N_("No instruments are listed for this project."),
    "col_id": N_("Id"),
    "col_kind": N_("Kind"),
    "col_model": N_("Model"),
    "col_serial": N_("Serial"),
    "col_due": N_("Calibration due"),
    "col_used": N_("Used"),
    "col_cal_state": N_("State at use"),
    "cal_ok": N_("in calibration"),
    "cal_overdue": N_("PAST DUE when used"),
    "cal_unknown": N_("no due date given"),
    "cal_unused": N_("not named by any result"),
    "kind_light-source": N_("light source"),
    "kind_power-meter": N_("power meter"),
    "kind_otdr": N_("OTDR"),
    "kind_test-cord": N_("test cord"),
    "kind_other": N_("other"),
    "technicians_heading": N_("Technicians"),
    "technicians_none": N_("No technicians are listed."),
    "method_heading": N_("Test method"),
    "method_intro": N_(
        "Insertion loss was measured with a light source and a power meter after setting a "
        "reference. The reference method decides which end connections the measured loss "
        "contains; the limit counts exactly those."
    ),
    "method_one-cord": N_("one-cord reference: both end connections are inside the measured loss (limit counts 2 end connections)"),
    "method_two-cord": N_("two-cord reference: one end connection is inside the measured loss (limit counts 1 end connection)"),
    "method_three-cord": N_("three-cord reference: neither end connection is inside the measured loss (limit counts none)"),
    "method_source": N_("Reference methods as described in IEC 61280-4-1 (multimode) and IEC 61280-4-2 (single-mode)."),
    "method_wavelengths": N_("Required wavelengths: multimode {multimode} nm; single-mode {singlemode} nm."),
    "method_directions_both": N_("Each strand is tested in both directions, A\u2192B and B\u2192A."),
    "method_directions_one": N_("Each strand is tested in one direction."),
    "method_uncertainty": N_("Results within \u00b1{value} dB of their limit are marked \u201cwithin uncertainty\u201d; they still pass or fail on the measured value."),
    "method_judging": N_(
        "Limit = \u03b1\u00b7L + (connections + E)\u00b7connection allowance + splices\u00b7splice "
        "allowance + \u03a3 component losses; margin = limit \u2212 loss. A result passes when "
        "loss \u2264 limit. A link fails when any judged result fails, is incomplete when a "
        "required result is missing or invalid, and passes otherwise. When a result was "
        "repeated, the latest test is judged and earlier ones are shown as superseded."
    ),
    "limits_heading": N_("Limit set and sources"),
    "limits_status_intro": N_(
        "Status says how each value was checked: against a published reproduction of the "
        "standard\u2019s table, or not yet against the standard\u2019s text (confirm those with "
        "your copy of the standard)."
    ),
    "status_none": N_("as stated by the source named"),
    "cover_values_confirmed": N_("Every published value this report uses was checked against a published reproduction of its standard\u2019s table (see the appendix)."),
    "limits_id": N_("Identifier"),
    "limits_origin": N_("Origin"),
    "limits_origin_builtin": N_("built-in"),
    "limits_connection": N_("Mated connection allowance"),
    "limits_splice": N_("Splice allowance"),
    "limits_table_all": N_("all"),
    "limits_table_inside": N_("inside plant"),
    "limits_table_outside": N_("outside plant"),
    "col_table": N_("Construction"),
    "col_alpha": N_("Attenuation dB/km"),
    "components_heading": N_("Component catalogue"),
    "components_source": N_("loss stated for the part in this project\u2019s component catalogue"),
    "safety_heading": N_("Safety"),
    "glossary_heading": N_("Terms used"),
    "footer_left": "{title}",
})

GLOSSARY: Final[tuple[tuple[str, str], ...]] = (
    (N_("insertion loss"), N_("The drop in optical power, in dB, that a link causes between a source and a meter.")),
    (N_("dB"), N_("Decibel: ten times the base-10 logarithm of a power ratio. Losses in dB add along a link.")),
    (N_("dBm"), N_("Optical power relative to one milliwatt: 0 dBm = 1 mW, \u221210 dBm = 0.1 mW.")),
    (N_("limit"), N_("The largest insertion loss the limit set allows for this link at a wavelength.")),
    (N_("margin"), N_("Limit minus measured loss. Positive: room to spare; negative: over the limit.")),
    (N_("reference method"), N_("How the meter was zeroed before testing (one-, two- or three-cord); it decides which end connections the result includes.")),
    (N_("mated connection"), N_("Two connectors joined in an adapter; each has an allowance in the limit set.")),
    (N_("splice"), N_("A permanent joint of two fibers, fused or mechanical.")),
    (N_("strand"), N_("One fiber of a link, numbered from 1.")),
    (N_("OTDR"), N_("Optical time-domain reflectometer: shows loss and reflections along a fiber from one end.")),
    (N_("reflectance"), N_("The share of light a connection sends back, in dB: the more negative, the better.")),
    (N_("bidirectional average"), N_("The mean of an event's losses measured from both ends; it cancels the apparent gain or extra loss where two fibers of slightly different backscatter meet.")),
    (N_("LSA"), N_("Least-squares approximation: straight lines fitted to the trace before and after an event; the step between them is the event's loss.")),
    (N_("OM1\u2013OM5, OS1, OS1a, OS2"), N_("Multimode (OM) and single-mode (OS) fiber categories of ISO/IEC 11801.")),
    (N_("within uncertainty"), N_("A result closer to its limit than the stated measurement uncertainty.")),
    (N_("superseded"), N_("An earlier test of the same strand, wavelength and direction, replaced by a later one.")),
    (N_("channel loss"), N_("The insertion loss an application allows between its transmitter and receiver, connections included.")),
    (N_("power budget"), N_("Launch power minus link loss, compared with the receiver\u2019s window from its lowest average receive power (weakest usable) to overload (strongest tolerated).")),
    (N_("end allowance"), N_("The allowance of the end connections a two- or three-cord reference leaves out of the measured loss, added before an application\u2019s maximum channel loss is checked.")),
    (N_("attenuator"), N_("A passive part that adds a fixed loss, fitted at the receiver when the light would otherwise be too strong.")),
    (N_("SHA-256"), N_("A checksum computed from every byte of a file (FIPS 180-4): a copy with the same checksum is the same file; any change gives a different one.")),
)

SAFETY: Final[tuple[str, ...]] = (
    N_("Light at 850, 1300, 1310, 1490, 1550 and 1625 nm is invisible: seeing no light does not mean there is no power. Never look into a fiber end or a connector, directly or through an unfiltered microscope."),
    N_("Inspect end faces with a filtered or video inspection scope; confirm a fiber is dark with a power meter. Cap every unused connector and adapter."),
    N_("Laser sources are classified under IEC 60825-1 (classes 1, 1M, 2, 2M, 3R, 3B, 4). IEC 60825-2 assigns hazard levels to locations in a fiber network (unrestricted up to 2M, restricted up to 3R, controlled up to 3B)."),
    N_("Fiber offcuts and shards pierce skin and are hard to see: collect them in a marked, closed container; no food or drink at the work area."),
    N_("These notes do not replace local regulations, the site\u2019s laser safety rules, the applicable standards or licensed practice; follow those first."),
)


STATUS_TEXT: Final[tuple[tuple[str, str], ...]] = (
    ("verified, secondary against the", N_("checked against a published reproduction of the")),
    ("verified, secondary", N_("checked against a published reproduction of the table")),
    ("from memory", N_("not checked against the standard\u2019s text: confirm with your copy")),
    ("derived", N_("worked out from checked values")),
    ("LOW confidence", N_("low confidence")),
)


def customer_status(status: str, lang: Language = ENGLISH) -> str:
    """A data status ("verified, secondary", "from memory", "850 nm verified, secondary;
    1300 nm from memory") in words a customer understands; "" stays "" (no status given)."""
    text = status
    for word, meaning in STATUS_TEXT:
        text = text.replace(word, lang.gettext(meaning))
    return text
