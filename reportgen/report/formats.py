"""Number and date formats: every number the report prints goes through one of these.

The templates use them as filters (``|db``, ``|dbm``, ``|length``, ``|km``, ``|date``,
``|datetime``, ``|setting``), bound to the report's language by
``reportgen.report.render.make_environment``. A value is rounded once, by the English rule
written here or in :mod:`reportgen.units` (dB: ``units.format_db``, the rule results.csv and
summary.json follow too), and then written in the language's form
(:meth:`reportgen.report.i18n.Language.number`: decimal sign and grouping from CLDR).
Units (dB, dBm, dB/km, nm, m, ft, km) are the same in every language.
"""
from __future__ import annotations

from typing import Final

from reportgen import units
from reportgen.report.i18n import ENGLISH, N_, Language

NO_VALUE: Final = "\u2014"  # a dash where there is no value (no margin, no limit)
NOT_GIVEN: Final = N_("not given")


def whole_or_tenth(value: float) -> str:
    """A length or duration in English form: whole, or one decimal when it has a tenth."""
    text = f"{value:.0f}" if abs(value - round(value)) < 0.05 else f"{value:.1f}"
    if text.startswith("-") and float(text) == 0:  # never "-0"
        text = text[1:]
    return text


def format_db(value: float | None, lang: Language = ENGLISH) -> str:
    """A loss, limit or margin in dB with two decimals (units.format_db); a dash when none."""
    if value is None or value != value:
        return NO_VALUE
    return lang.number(units.format_db(value))


def format_dbm(value: float | None, lang: Language = ENGLISH) -> str:
    """An optical power in dBm with two decimals."""
    return format_db(value, lang)


def format_length(length_m: float, unit: str = "m", lang: Language = ENGLISH) -> str:
    """A length given in metres, shown in ``unit`` ("m" or "ft"), whole or one decimal."""
    value = units.m_to_ft(length_m) if unit == "ft" else length_m
    return f"{lang.number(whole_or_tenth(value))}\u00a0{unit}"


def format_setting(value: float, lang: Language = ENGLISH) -> str:
    """A threshold of project.yaml as written: 24, 0.5, 0.02 (no trailing zeros)."""
    return lang.number(f"{value:g}")


def format_km(length_km: float, lang: Language = ENGLISH) -> str:
    """A length in km with three decimals (metre resolution)."""
    return lang.number(f"{length_km:.3f}")


def format_date(value: object, with_time: bool = False, lang: Language = ENGLISH) -> str:
    """A date (or date-time): ISO 8601 in English (2026-04-14, 2026-04-14 08:40), the
    locale's numeric order otherwise (14.04.2026 08:40 in German); midnight: date only."""
    if value is None:
        return lang.gettext(NOT_GIVEN)
    timed = with_time and hasattr(value, "hour") and (value.hour, value.minute, value.second) != (0, 0, 0)
    return lang.date(value, with_time=timed)
