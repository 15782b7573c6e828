"""Words of the audit findings: the one-line message of each finding and, for the appendix,
what each rule checks and the basis of its thresholds.

summary.json carries the English message (``finding_text(finding)``); the report the one of
its language. Marked for translation with ``N_``/``Np_`` (reportgen/report/i18n.py).
"""
from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Final

from reportgen import units
from reportgen.report.formats import NOT_GIVEN, format_date, whole_or_tenth
from reportgen.report.i18n import ENGLISH, N_, Language, Np_
from reportgen.report.messages import Words


# One line per finding, worded from Finding.values (reportgen.engine.findings). summary.json
# carries the same line. Placeholders ending _db are dB (2 decimals), _m metres, _h hours.
FINDING_TEXT: Final[Mapping[str, str]] = MappingProxyType({
    "calibration-overdue": N_("Used after its calibration due date: {instruments}, for {results} (last use {last_use})."),
    "calibration-unknown": N_("Instrument {instrument} is named by results but has no calibration due date in project.yaml."),
    "result-in-future": N_("Dated after the report date {today}: {results} (latest {last})."),
    "result-before-work": N_("Dated before the work started on {started}: {results} (earliest {first})."),
    "result-outside-period": N_("Dated outside the test period {start} to {end}: {results} ({first} to {last})."),
    "retest-order": N_("Dated before an earlier row of the same result in {file}: {rows} (first at line {line}); a retest cannot be older than what it replaces."),
    "ambiguous-retest": N_("Two rows with the same time and different losses ({low_db} to {high_db} dB): {results}; which is the retest cannot be told."),
    "reference-method": N_("Reference method {used} was used; {required} is required."),
    "application-not-supported": N_("Listed application not supported as measured: {applications}."),
    "transceiver-too-weak": N_("Transceiver {transceiver}: the weakest received power is {shortfall_db} dB below the receiver\u2019s minimum."),
    "transceiver-no-fit": N_("Transceiver {transceiver}: the received power is too strong and no attenuator of testing.attenuators_db fits."),
    "transceiver-too-strong": N_("Transceiver {transceiver}: the strongest received power is {excess_db} dB above overload; fit a {attenuator_db} dB attenuator."),
    "within-uncertainty": N_("Within the measurement uncertainty of the limit: {results} (smallest margin {worst_margin_db} dB)."),
    "direction-asymmetry": N_("A\u2192B and B\u2192A differ by more than {threshold_db} dB: {pairs} (largest difference {worst_db} dB)."),
    "implausibly-low-loss": N_("Below the least loss the link can have: {results} (lowest {least_loss_db} dB, least plausible {bound_db} dB); check the reference."),
    "repeated-readings": N_("Identical readings of {loss_db} dB at one wavelength: {results}; {count} or more are unlikely."),
    "repeated-readings-technician": N_("Identical readings of {loss_db} dB in a row by {technician}: {results}; {count} or more are unlikely."),
    "length-implausible": N_("Documented length {length_m} m is under {minimum_m} m, implausible for {plant} cable: check the unit (km written as m?)."),
    "length-mismatch": N_("Measured length {measured_m} m differs from the documented {documented_m} m by {difference_m} m (allowed {allowed_m} m; {results} off)."),
    "reference-missing": N_("No reference of the power meter at the wavelength set before the test: {results}."),
    "reference-stale": N_("Measured more than {max_age_h} h after the meter\u2019s reference: {results} (oldest {age_h} h)."),
    "cords-not-verified": N_("Reference of {instrument} at {wavelength_nm} nm set {set_at}: test cords {cords} not verified ({results} rest on it)."),
    "cords-over-limit": N_("Reference of {instrument} at {wavelength_nm} nm set {set_at}: test cord check {cord_check_db} dB is over {max_db} dB ({results} rest on it)."),
    "inspection-failed": N_("The latest end-face inspection failed at {ends}."),
    "inspection-missing": N_("No end-face inspection recorded at {ends}."),
})

# What each rule checks and the basis of its thresholds (appendix; docs/project-format.md
# "Audit findings" gives the same sources).
RULE_TEXT: Final[Mapping[str, tuple[str, str]]] = MappingProxyType({
    "calibration-overdue": (N_("A judged result made with an instrument after its calibration due date."), N_("Calibration due dates in project.yaml instruments.")),
    "result-in-future": (N_("A result dated more than a day after the day the report was made (a day allows for time zones)."), N_("Cannot happen: a date or clock error.")),
    "result-before-work": (N_("A result dated before project.work_started."), N_("Cannot belong to this installation.")),
    "retest-order": (N_("In one file, a row dated before an earlier row of the same strand, wavelength and direction."), N_("A retest cannot be older than what it replaces.")),
    "ambiguous-retest": (N_("Two rows of one result with the same time and different losses."), N_("Which row is the retest cannot be told.")),
    "reference-method": (N_("The reference method differs from testing.required_reference_method, or a reference record states another method."), N_("The customer\u2019s specification; the limit counts the end connections of the method used.")),
    "application-not-supported": (N_("A listed application the link does not support as measured."), N_("The application table (appendix).")),
    "transceiver-too-weak": (N_("The transceiver\u2019s weakest received power is below its receive minimum, or it is too strong and no attenuator fits."), N_("The transceiver catalogue in project.yaml.")),
    "inspection-failed": (N_("The latest end-face inspection of a strand at a link end failed."), N_("Inspection records; criteria as recorded (e.g. IEC 61300-3-35).")),
    "transceiver-too-strong": (N_("The transceiver\u2019s strongest received power is above overload; an attenuator fits."), N_("The transceiver catalogue in project.yaml.")),
    "within-uncertainty": (N_("A judged result closer to its limit than testing.uncertainty_db."), N_("The stated measurement uncertainty.")),
    "result-outside-period": (N_("A result dated outside testing.period."), N_("The test period of project.yaml.")),
    "direction-asymmetry": (N_("|A\u2192B \u2212 B\u2192A| of one strand and wavelength above asymmetry_db."), N_("Common practice: unlike connector pairs at the two ends make the directions differ a little; more than about 0.5 dB points to a dirty or damaged end face or a reference problem.")),
    "implausibly-low-loss": (N_("A judged result below the least loss the link can have, by more than the uncertainty: fiber length \u00d7 rayleigh_db_um4_per_km / \u03bb[\u00b5m]\u2074 + mated connections in the measurement \u00d7 low_loss_connection_db."), N_("Recalled, not checked against a published source: Rayleigh scattering of silica fiber is about 0.7\u20130.9 dB/km at 1 \u00b5m, falling as 1/\u03bb\u2074 (0.12 dB/km at 1550 nm with 0.7); common practice: even reference-grade connector pairs lose a few hundredths of a dB. Suggests a wrong reference or a meter referenced through the link.")),
    "repeated-readings": (N_("repeat_count or more judged results of one link and wavelength with the same loss to 0.01 dB, or that many in a row by one technician."), N_("Derived: readings scatter by a few hundredths of a dB (common practice), so one repeat has a chance of about 1 in 5 or less and five repeats about 0.2\u2075 = 0.03 %.")),
    "length-implausible": (N_("A documented length under min_length_inside_m or min_length_outside_m."), N_("Common practice: an outside-plant cable runs between buildings or to a cabinet; a length of a few metres is usually km written as m.")),
    "length-mismatch": (N_("A measured length off the documented one by more than length_tolerance_percent of it plus length_tolerance_m."), N_("Common practice: fiber in a stranded cable is longer than the sheath (helix, about 0.5\u20133 %, recalled); slack loops, patching and the meter\u2019s index setting add the rest.")),
    "reference-missing": (N_("A judged result without a reference of its power meter at its wavelength set before it (references/ present)."), N_("IEC 61280-4-1 and -4-2: every measurement is made against a reference.")),
    "reference-stale": (N_("A judged result measured more than reference_max_age_h after its reference."), N_("Common practice: set the reference at the start of each working day and whenever a test cord is changed.")),
    "cords-not-verified": (N_("A reference in use whose test cords were not checked, or whose check read more than cord_check_max_db."), N_("IEC 61280-4-1 and -4-2 describe checking the test cords by mating them; the 0.2 dB limit is recalled, not checked against the standard\u2019s text: a reference-grade pair reads 0.1 to 0.2 dB or less.")),
    "inspection-missing": (N_("A strand at a link end without any end-face inspection (inspections/ present)."), N_("Common practice: inspect, and clean if needed, every end face before it is mated.")),
    "calibration-unknown": (N_("An instrument named by results without a calibration due date."), N_("Calibration cannot be shown.")),
})
# testing.audit keys as the appendix names them
THRESHOLD_UNIT: Final[Mapping[str, str]] = MappingProxyType({
    "asymmetry_db": "dB", "rayleigh_db_um4_per_km": "dB\u00b7\u00b5m\u2074/km",
    "low_loss_connection_db": "dB", "repeat_count": "", "min_length_inside_m": "m",
    "min_length_outside_m": "m", "length_tolerance_percent": "%", "length_tolerance_m": "m",
    "reference_max_age_h": "h", "cord_check_max_db": "dB",
})

# Counted nouns of a finding's values.
COUNTED: Final[Mapping[str, tuple[str, str]]] = MappingProxyType({
    "results": Np_("{count} result", "{count} results"),
    "rows": Np_("{count} row", "{count} rows"),
    "pairs": Np_("{count} strand and wavelength pair", "{count} strand and wavelength pairs"),
})
STRAND_END: Final = N_("strand {strand} end {end}")
# a link's plant (reportgen.model.Plant) inside a finding's sentence: "... for {plant} cable"
PLANT_WORD: Final[Mapping[str, str]] = MappingProxyType({"inside": N_("inside"),
                                                         "outside": N_("outside")})
INSTRUMENT_DUE: Final = N_("{name} (due {day})")


def _finding_value(key: str, value: object, lang: Language) -> str:
    """A value of a finding's message: dB 2 decimals, metres and hours whole or 1 decimal,
    dates ISO (English) or the language's order, lists joined."""
    if value is None:
        return lang.gettext(NOT_GIVEN)
    if key in COUNTED:
        singular, plural = COUNTED[key]
        return lang.ngettext(singular, plural, value).format(count=value)  # type: ignore[arg-type]
    if key == "ends":
        return ", ".join(lang.gettext(STRAND_END).format(strand=strand, end=end.upper())
                         for strand, end in value)  # type: ignore[union-attr]
    if isinstance(value, tuple):
        return ", ".join(str(item) for item in value)
    if isinstance(value, float):
        if key.endswith("_db"):
            return lang.number(units.format_db(value))
        return lang.number(whole_or_tenth(value))
    if hasattr(value, "year"):
        return format_date(value, with_time=True, lang=lang)
    return str(value)


def finding_text(finding, lang: Language = ENGLISH) -> str:
    """The one-line message of a ``reportgen.engine.findings.Finding`` in ``lang``."""
    values = dict(finding.values)
    key = finding.rule
    if key == "calibration-overdue":
        values["instruments"] = tuple(lang.gettext(INSTRUMENT_DUE).format(name=name, day=format_date(day, lang=lang))
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
    elif key == "length-implausible" and values.get("plant") in PLANT_WORD:
        values["plant"] = lang.gettext(PLANT_WORD[str(values["plant"])])
    elif key == "reference-method":
        words = Words(lang)
        values.update({name: ", ".join(words.get(f"method_name_{method}", method)
                                       for method in str(values[name]).split(", "))
                       for name in ("used", "required") if name in values})
    elif key == "reference-missing" and not values.get("meters"):
        values["meters"] = ()
    shown = {name: _finding_value(name, value, lang) for name, value in values.items()}
    return lang.gettext(FINDING_TEXT[key]).format(**shown)
