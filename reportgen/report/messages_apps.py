"""Words of the applications, transceiver power budgets and the reasons an application is
not supported (link sheets, the project section ``applications``, the appendix).

Part of the report's catalogue (``reportgen.report.messages.TEXT`` joins it); marked for
translation with ``N_`` (reportgen/report/i18n.py).
"""
from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import TYPE_CHECKING, Final

from reportgen import units
from reportgen.model import ReasonKind
from reportgen.report.i18n import ENGLISH, N_, Language

if TYPE_CHECKING:
    from reportgen.engine.applications import Reason

APPS_TEXT: Final[Mapping[str, str]] = MappingProxyType({
    "verdict_supported": N_("supported"),
    "verdict_not-supported": N_("not-supported"),
    "verdict_untested": N_("untested"),
    "verdict_supported-within": N_("supported, within uncertainty"),
    "mark_supported-within": "\u25d0",
    "verdict_ok": N_("ok"),
    "verdict_too-weak": N_("too-weak"),
    "verdict_too-strong": N_("too-strong"),
    "verdict_no-fit": N_("no-fit"),
    "mark_supported": "\u25cf",
    "mark_not-supported": "\u2715",
    "mark_untested": "\u25cc",
    "mark_ok": "\u25ce",
    "mark_too-weak": "\u2193",
    "mark_too-strong": "\u2191",
    "mark_no-fit": "\u21c8",
    "cell_not-listed-not-supported": "\u00b7",
    "link_apps_heading": N_("Applications on this link"),
    "link_apps_intro": N_(
        "Each application listed for the link, checked for {fiber_type} against its "
        "maximum channel loss and length. Worst loss: the highest judged loss over every strand "
        "and direction at the wavelengths the application needs."
    ),
    "link_apps_none": N_("No application is listed for this link."),
    "apps_worst_plus": "{worst} + {added} = {checked}",
    "apps_all_met_link_fails": N_("loss within the channel allowance; link fails its cabling limit"),
    "apps_within_uncertainty": N_("within {value} dB of a limit: the measurement cannot tell on which side"),
    "apps_no_reach": N_("none set"),
    "apps_transceiver_differs": N_(
        "{application} and transceiver {transceiver} disagree. The application allows {channel} dB "
        "of channel loss on {fiber_type}; the optic\u2019s power window allows {window} dB (its "
        "lowest launch power, {tx_min} dBm, less its receive minimum, {rx_min} dBm). Whether this "
        "optic works is decided by its power window, below; the application verdict above judges "
        "the cabling against the standard\u2019s channel."
    ),
    "col_application": N_("Application"),
    "col_needs": N_("Tested at \u03bb nm"),
    "col_max_channel": N_("Channel loss allowed dB"),
    "col_worst_loss": N_("Worst loss dB"),
    "col_max_length": N_("Max. length"),
    "col_why": N_("Reasons"),
    "apps_loss_window": N_("{low} to {high}"),
    "apps_pon_least": N_("least {value}"),
    "apps_all_met": N_("every check met"),
    "apps_capable_label": N_("Supported as measured (every application in the table):"),
    "apps_capable_none": N_("none of the table\u2019s applications"),
    # why an application is not supported (or untested) on a link, by reason kind
    # (reportgen.model.ReasonKind); see reason_text for the fields
    "reason_fiber-type-not-specified": N_("fiber type {fiber_type} not specified for {application}"),
    "reason_too-long": N_("too long: {value} m documented, {limit} m allowed on {fiber_type}"),
    "reason_too-much-loss": N_("too much loss at {wavelength_nm} nm: {value} dB measured, {limit} dB allowed"),
    "reason_too-much-loss-added": N_(
        "too much loss at {wavelength_nm} nm: {value} dB measured + {added} dB for the end "
        "connections the reference left out = {checked} dB, {limit} dB allowed"),
    "reason_too-little-loss": N_("too little loss at {wavelength_nm} nm: {value} dB measured, class minimum {limit} dB"),
    "reason_untested": N_("untested at {wavelength_nm} nm: no judged result"),
    "power_heading": N_("Transceiver power budget"),
    "field_basis": N_("Loss basis"),
    "basis_measured": N_("measured \u2013 the lowest and highest judged loss of this link at {wavelength} nm, over every strand and direction"),
    "basis_budget": N_("budget \u2013 no judged result yet, so the link\u2019s limit at {wavelength} nm stands for both the lowest and the highest loss; confirm by testing"),
    "field_power_wavelength": N_("Wavelength used"),
    "power_wavelength_same": N_("{wavelength} nm, the optic\u2019s own"),
    "power_wavelength_nearest": N_("{wavelength} nm: the optic runs at {own} nm; the nearest wavelength with losses was used"),
    "field_loss_used": N_("Loss used"),
    "power_loss_range": N_("{least} to {worst} dB"),
    "field_launch": N_("Launch power"),
    "field_received": N_("Received power"),
    "power_dbm_range": N_("{low} to {high} dBm"),
    "power_received_how": N_("({tx_min} \u2212 {worst}) to ({tx_max} \u2212 {least})"),
    "power_received_how_added": N_("({tx_min} \u2212 ({worst} + {added} end allowance)) to ({tx_max} \u2212 {least})"),
    "field_receiver_window": N_("Receiver window"),
    "power_receiver_window": N_("{rx_min} dBm (lowest average receive power) to {overload} dBm (overload)"),
    "field_margin_low": N_("Margin above receive minimum"),
    "field_headroom_high": N_("Headroom below overload"),
    "power_margin_how": N_("weakest case: lowest received power \u2212 receive minimum"),
    "power_headroom_how": N_("strongest case: overload \u2212 highest received power"),
    "field_power_verdict": N_("Outcome"),
    "power_says_ok": N_("Both the weakest and the strongest case fall inside the receiver window."),
    "power_says_too-weak": N_(
        "The weakest case is {short} dB below the receive minimum. An attenuator cannot help: bring the "
        "link loss down (clean, re-terminate, remove a connection) or use an optic with a larger "
        "power budget."
    ),
    "power_says_too-strong": N_(
        "The strongest case is {excess} dB above the overload level. Fit a {attenuator} dB "
        "attenuator at the receiver; received power is then {low} to {high} dBm, inside the window."
    ),
    "power_says_no-fit": N_(
        "The strongest case is {excess} dB above the overload level, and no attenuator on the "
        "project\u2019s list ({offered} dB) brings it down while keeping the weakest case at or "
        "above the receive minimum. Choose a different optic."
    ),
    "power_attenuator_label": N_("Recommended attenuator"),
    "power_diagram_caption": N_(
        "Solid line, round marks: highest level (maximum launch power, least loss). Dashed line, "
        "square marks: lowest level (minimum launch power, worst loss). Hatched band: receiver "
        "window. The loss is shared among the parts in proportion to the loss budget "
        "(schematic); the end values are exact."
    ),
    "apps_heading": N_("Applications and optics"),
    "apps_intro": N_(
        "Which network applications each link carries as measured, and whether the optics planned "
        "for the links receive a usable level. Rules and sources are in the appendix."
    ),
    "power_list_heading": N_("Transceiver power budgets"),
    "power_list_intro": N_("Links fitted with a transceiver; those receiving too little or too much light come first."),
    "power_list_none": N_("No link names a transceiver."),
    "col_transceiver": N_("Transceiver"),
    "col_received": N_("Received dBm"),
    "col_margin_low": N_("Margin dB"),
    "col_headroom": N_("Headroom dB"),
    "col_attenuator": N_("Attenuator dB"),
    "matrix_heading": N_("Applications by link"),
    "matrix_intro": N_(
        "One table per fiber type: its links against every application one of them lists or would "
        "support as measured. Framed cells are the applications listed for the link; "
        "unframed grey cells are what the link would also carry."
    ),
    "matrix_group": N_("{fiber_type} links"),
    "matrix_group_continued": N_("{fiber_type} links (continued)"),
    "matrix_none": N_("No link lists or would support an application of the table."),
    "legend_listed": N_("listed"),
    "legend_capable": N_("not listed"),
    "legend_dot": N_("not supported, not listed"),
    "appx_apps_heading": N_("Applications and power budgets: rules and sources"),
    "appx_apps_worst": N_(
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
    "appx_apps_pon": N_(
        "PON loss classes also set a minimum: the lowest judged loss at each needed wavelength, as "
        "measured, must not fall below the class minimum, or the receivers may be overloaded. Each "
        "class is checked at the wavelengths its standard names (GPON, ITU-T G.984.2: 1310 and "
        "1490 nm; XG-PON and XGS-PON, G.987.2 / G.9807.1: 1270 and 1577 nm). Results at those "
        "wavelengths have no cabling limit: they are shown as not judged and count only here."
    ),
    "appx_apps_power": N_(
        "Transceiver power. Received power = launched power \u2212 link loss (common practice). "
        "The received power lies in the window [tx_min \u2212 (worst loss + end allowance), "
        "tx_max \u2212 least loss], using the judged losses at the tested wavelength nearest the optic\u2019s (basis "
        "measured) or, when the link has no judged result, its limit (basis budget). Margin = "
        "lowest received power \u2212 receive minimum; headroom = overload \u2212 highest received "
        "power. Verdicts: ok; too-weak (margin below zero); too-strong (headroom below zero, an "
        "attenuator fits); no-fit (too strong and none fits)."
    ),
    "appx_apps_attenuator": N_(
        "Attenuator: the smallest value from the project\u2019s list of attenuators ({offered} dB) "
        "that brings the highest received power to or below the overload level while keeping the "
        "lowest at or above the receive minimum."
    ),
    "appx_apps_table_intro": N_("Rows of the built-in application table used in this record: the applications shown, for the fiber types of this project."),
    "appx_apps_status": N_(
        "Status: \u201cchecked against a published reproduction of the table\u201d = the value was "
        "read in a public source reproducing the standard\u2019s table; \u201cworked out from "
        "checked values\u201d = arithmetic on such values or a stated rule; \u201cnot checked "
        "against the standard\u2019s text\u201d = the value has not been compared with the "
        "standard\u2019s own text: confirm it with your copy before relying on a verdict near it."
    ),
    "col_family": N_("Family"),
    "col_fiber_types": N_("Fiber types"),
    "col_loss_window": N_("Channel loss dB"),
    "col_status": N_("Status"),
    "apps_max_only": "\u2264 {high}",
})


def reason_text(reason: Reason, lang: Language = ENGLISH) -> str:
    """Words for why an application is not supported (or untested) on a link.

    Fields: application, fiber_type, wavelength_nm, value and limit (whole metres for
    a length, two decimals for a loss in dB). summary.json carries the English text.
    """
    def number(value: float) -> str:
        return lang.number(f"{value:.0f}" if reason.kind is ReasonKind.TOO_LONG else units.format_db(value))
    key = f"reason_{reason.kind.value}"
    if reason.kind is ReasonKind.TOO_MUCH_LOSS and reason.added_db:
        key = "reason_too-much-loss-added"
    return lang.gettext(APPS_TEXT[key]).format(
        application=reason.application, fiber_type=reason.fiber_type,
        wavelength_nm=reason.wavelength_nm,
        value=None if reason.value is None else number(reason.value),
        limit=None if reason.limit is None else number(reason.limit),
        added=lang.number(units.format_db(reason.added_db)),
        checked=None if reason.checked is None else number(reason.checked))

