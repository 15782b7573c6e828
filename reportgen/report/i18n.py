"""The report's language: gettext catalogues and the locale's number and date forms.

The words of the report are English in the source (``reportgen/report/messages.py`` and
its siblings, marked with :func:`N_`, :func:`Np_` and :func:`C_` so that Babel extracts them, and the
templates, which may call ``_``/``gettext``/``ngettext`` of ``jinja2.ext.i18n``). Their
translations are the catalogues ``reportgen/locale/<code>/LC_MESSAGES/reportgen.po``
(DEVELOPERS.md "Translate the report"); a built wheel carries them compiled (``.mo``,
``hatch_build.py``), a source checkout compiles a ``.po`` in memory when it has no
up-to-date ``.mo``.

Numbers and dates take their form from the Unicode CLDR data shipped with Babel (decimal
sign, grouping, date order). Rounding is not done here: a number arrives as the English
text of its one rounding rule (``reportgen.units.format_db``, ...) and only its signs are
exchanged, so every language prints the same value. English keeps the forms the report
always had (no grouping, ISO 8601 dates). Terminal output and error messages stay English.
"""
from __future__ import annotations

import functools
import gettext
import io
from dataclasses import dataclass
from decimal import Decimal
from pathlib import Path
from typing import Final

from babel import Locale
from babel.dates import format_skeleton
from babel.messages import mofile, pofile
from babel.numbers import format_decimal

from reportgen.model import ReportLanguage

DOMAIN: Final = "reportgen"
LOCALE_DIR: Final = Path(__file__).resolve().parent.parent / "locale"
SOURCE_LANGUAGE: Final = ReportLanguage.EN
DATE_SKELETON: Final = "yMMdd"  # CLDR skeleton: day, month, year in the locale's order
TIME_SKELETON: Final = "Hm"  # CLDR skeleton: 24-hour time, hours and minutes


def N_(text: str) -> str:
    """Mark ``text`` for translation where it is defined; it is translated when shown."""
    return text


class Contextual(str):
    """A catalogue text whose English reads the same as another's but whose translation
    may differ (``Position`` of a person, ``Position`` along a fiber): translated with
    pgettext under its context."""

    context: str

    def __new__(cls, context: str, text: str) -> Contextual:
        made = super().__new__(cls, text)
        made.context = context
        return made


def C_(context: str, text: str) -> Contextual:
    """Mark ``text`` for translation under ``context`` (msgctxt)."""
    return Contextual(context, text)


def Np_(singular: str, plural: str) -> tuple[str, str]:
    """Mark a text with a count (singular, plural) for translation with ngettext."""
    return (singular, plural)


def catalogue_path(code: str, suffix: str = ".po") -> Path:
    """Where the catalogue of language ``code`` is (``.po`` source or compiled ``.mo``)."""
    return LOCALE_DIR / code / "LC_MESSAGES" / f"{DOMAIN}{suffix}"


@functools.lru_cache(maxsize=None)
def translations(code: str) -> gettext.NullTranslations:
    """The gettext translations of ``code``: the compiled ``.mo`` if it is there and not
    older than its ``.po``, else the ``.po`` compiled in memory; English: none."""
    if code == SOURCE_LANGUAGE:
        return gettext.NullTranslations()
    source, compiled = catalogue_path(code), catalogue_path(code, ".mo")
    if compiled.is_file() and (not source.is_file()
                               or compiled.stat().st_mtime >= source.stat().st_mtime):
        return gettext.GNUTranslations(io.BytesIO(compiled.read_bytes()))
    with source.open("rb") as handle:
        catalog = pofile.read_po(handle, locale=code, domain=DOMAIN)
    buffer = io.BytesIO()
    mofile.write_mo(buffer, catalog, use_fuzzy=False)
    buffer.seek(0)
    return gettext.GNUTranslations(buffer)


@dataclass(frozen=True)
class Language:
    """One report language: its translations and its CLDR locale."""

    code: str
    locale: Locale
    translations: gettext.NullTranslations

    def gettext(self, text: str) -> str:
        if isinstance(text, Contextual):
            return self.translations.pgettext(text.context, text)
        return self.translations.gettext(text)

    def ngettext(self, singular: str, plural: str, count: int) -> str:
        return self.translations.ngettext(singular, plural, count)

    def number(self, text: str) -> str:
        """A number written in English form ("1234.50", "-0.4") in this locale's form
        ("1.234,50" in German), with the same digits: the value was rounded before."""
        if self.code == SOURCE_LANGUAGE:
            return text
        value = Decimal(text)
        decimals = max(0, -int(value.as_tuple().exponent))
        pattern = "#,##0" + ("." + "0" * decimals if decimals else "")
        return format_decimal(value, format=pattern, locale=self.locale)

    def date(self, value: object, with_time: bool = False) -> str:
        """A date (ISO 8601 in English) or date and time in this locale's order."""
        if self.code == SOURCE_LANGUAGE:
            if with_time:
                return f"{value:%Y-%m-%d %H:%M}"
            return f"{value:%Y-%m-%d}"
        text = format_skeleton(DATE_SKELETON, value, locale=self.locale)
        if with_time:
            text += " " + format_skeleton(TIME_SKELETON, value, locale=self.locale)
        return text


@functools.lru_cache(maxsize=None)
def language(code: str | ReportLanguage = SOURCE_LANGUAGE) -> Language:
    """The :class:`Language` of a ``report.language`` code (en, de, fr, es)."""
    code = ReportLanguage(code).value
    return Language(code, Locale.parse(code), translations(code))


ENGLISH: Final = language(SOURCE_LANGUAGE)
