"""The report's languages: catalogues complete and well-formed, CLDR number and date forms,
no English left in a German, French or Spanish report, the data files the same in every language.

Outside references: Babel's own catalogue checkers and plural rules, and the Unicode CLDR locale
data as shipped with Babel 2.18 (the expected forms below are typed by hand from it).
"""
from __future__ import annotations

import datetime as dt
import html
import re
from pathlib import Path

import pytest
from babel.messages import extract
from babel.messages.catalog import Catalog
from babel.messages.frontend import parse_mapping_cfg
from babel.messages.pofile import read_po

from reportgen import pipeline
from reportgen.errors import InputError
from reportgen.model import ReportLanguage
from reportgen.report import formats, i18n, messages, render

ROOT = Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_project"
LANGUAGES = ("de", "fr", "es")
PLACEHOLDER = re.compile(r"(?<!\{)\{([a-z_]+)\}(?!\})")
NOW = dt.datetime(2026, 4, 20, 9, 0, tzinfo=dt.timezone.utc)


def _catalog(code: str) -> Catalog:
    with i18n.catalogue_path(code).open("rb") as handle:
        return read_po(handle, locale=code, domain=i18n.DOMAIN)


def _template() -> Catalog:
    with (i18n.LOCALE_DIR / "reportgen.pot").open("rb") as handle:
        return read_po(handle)


def _key(message) -> tuple[str | None, str]:
    ident = message.id[0] if isinstance(message.id, tuple) else message.id
    return (message.context, ident)


# ---------------------------------------------------------------- the catalogues


def test_the_template_holds_every_marked_text_of_the_code():
    """reportgen.pot is up to date: Babel's extraction with babel.cfg finds the same messages
    (re-extract and update the .po files as DEVELOPERS.md says when this fails)."""
    with (ROOT / "babel.cfg").open(encoding="utf-8") as handle:
        method_map, options_map = parse_mapping_cfg(handle)
    keywords = {**extract.DEFAULT_KEYWORDS, "N_": None, "Np_": (1, 2), "C_": ((1, "c"), 2)}
    found = set()
    for filename, _line, message, _comments, context in extract.extract_from_dir(
            str(ROOT), method_map, options_map, keywords=keywords):
        ident = message[0] if isinstance(message, tuple) else message
        if filename.startswith(("reportgen", "templates")):
            found.add((context, ident))
    assert found == {_key(m) for m in _template() if m.id}


@pytest.mark.parametrize("code", LANGUAGES)
def test_every_message_is_translated_and_none_is_fuzzy(code):
    catalog = _catalog(code)
    template = {_key(m) for m in _template() if m.id}
    translated = {_key(m) for m in catalog if m.id}
    assert translated == template, "run pybabel update (DEVELOPERS.md) and translate the new texts"
    untranslated = [m.id for m in catalog if m.id and not (
        all(m.string) if isinstance(m.string, tuple) else m.string)]
    fuzzy = [m.id for m in catalog if m.id and m.fuzzy]
    assert untranslated == [] and fuzzy == [] and not catalog.fuzzy
    assert list(catalog.obsolete) == []


@pytest.mark.parametrize("code", LANGUAGES)
def test_babel_checkers_and_plural_forms(code):
    catalog = _catalog(code)
    # Babel's checkers: number of plural forms, python-format placeholders
    assert [(m.id, [str(e) for e in errors]) for m, errors in catalog.check()] == []
    # The plural rule is CLDR's as Babel 2.18 writes it: de and es "n != 1", fr "n > 1"
    # (French counts 0 as singular).
    expected = {"de": "nplurals=2; plural=(n != 1);", "fr": "nplurals=2; plural=(n > 1);",
                "es": "nplurals=2; plural=(n != 1);"}[code]
    assert catalog.plural_forms == expected
    for message in catalog:
        if message.id and isinstance(message.id, tuple):
            assert len(message.string) == 2


@pytest.mark.parametrize("code", LANGUAGES)
def test_placeholders_are_the_same_in_the_source_and_the_translation(code):
    wrong = []
    for message in _catalog(code):
        if not message.id:
            continue
        ids = message.id if isinstance(message.id, tuple) else (message.id,)
        strings = message.string if isinstance(message.string, tuple) else (message.string,)
        wanted = {name for ident in ids for name in PLACEHOLDER.findall(ident)}
        for text in strings:
            if sorted(set(PLACEHOLDER.findall(text))) != sorted(wanted):
                wrong.append((ids[0], text))
            # the stamp's escaped braces ({{page}}) stay escaped
            if text.count("{{") != ids[0].count("{{"):
                wrong.append((ids[0], text))
    assert wrong == []


def test_every_catalogue_text_with_words_is_marked_for_translation():
    """Texts left unmarked are marks, symbols, units and formulas only."""
    marked = {ident for _, ident in (_key(m) for m in _template() if m.id)}
    unmarked = {key for key, text in messages.TEXT.items()
                if text not in marked and not key.startswith("mark_")}
    assert unmarked == {
        "apps_max_only",  # "≤ {high}"
        "apps_worst_plus",  # "{worst} + {added} = {checked}"
        "cell_not-listed-not-supported",  # "·"
        "col_wavelength",  # "λ nm"
        "dg_start", "dg_finish", "end_a", "end_b",  # the link's ends A and B
        "evidence_setting",  # the file name project.yaml
        "footer_left",  # "{title}"
        "no_margin",  # "—"
        "unit_km", "unit_db_per_km",  # units
    }


def test_translations_are_loaded_from_the_source_catalogue_without_a_compiled_one():
    """A source checkout has no .mo (they are built into the wheel): the .po is compiled in memory."""
    if i18n.catalogue_path("de", ".mo").exists():
        pytest.skip("a compiled catalogue lies in the checkout")
    german = i18n.language("de")
    assert german.gettext(messages.PAGE_LABEL) == "Seite {page} von {pages}"
    assert german.ngettext("{count} result", "{count} results", 1) == "{count} Ergebnis"


# ---------------------------------------------------------------- CLDR forms


@pytest.mark.parametrize("code, number, date, time", [
    # CLDR via Babel 2.18, de: decimal ',' group '.'; date skeleton yMMdd -> dd.MM.y; Hm -> HH:mm
    ("de", "1.234,50", "14.04.2026", "14.04.2026 08:40"),
    # CLDR via Babel 2.18, fr: decimal ',' group U+202F (narrow no-break space); yMMdd -> dd/MM/y
    ("fr", "1\u202f234,50", "14/04/2026", "14/04/2026 08:40"),
    # CLDR via Babel 2.18, es: decimal ',' group '.'; yMMdd -> d/M/y; Hm -> H:mm
    ("es", "1.234,50", "14/4/2026", "14/4/2026 8:40"),
    # English keeps the report's forms: no grouping, ISO 8601 dates
    ("en", "1234.50", "2026-04-14", "2026-04-14 08:40"),
])
def test_numbers_and_dates_in_the_languages_form(code, number, date, time):
    lang = i18n.language(code)
    assert lang.number("1234.50") == number
    assert formats.format_date(dt.date(2026, 4, 14), lang=lang) == date
    assert formats.format_date(dt.datetime(2026, 4, 14, 8, 40), with_time=True, lang=lang) == time


def test_a_value_is_rounded_once_and_only_its_signs_change():
    german = i18n.language("de")
    # CLDR via Babel 2.18, de: decimal ','; the dB rounding is units.format_db's (2 decimals)
    assert formats.format_db(1.3, german) == "1,30"
    assert formats.format_db(-0.004, german) == "0,00"
    assert formats.format_db(None, german) == "\u2014"
    assert formats.format_km(0.12, german) == "0,120"
    assert formats.format_length(79.94, "m", german) == "79,9\u00a0m"
    assert formats.format_length(1234.0, "m", german) == "1.234\u00a0m"
    assert formats.format_setting(0.5, german) == "0,5"


# ---------------------------------------------------------------- reports


def _texts(document: str) -> list[str]:
    """The text nodes of an HTML document (styles and images dropped)."""
    document = re.sub(r"<style.*?</style>|<title>.*?</title>", "", document, flags=re.S)
    return [t for t in (html.unescape(part).strip() for part in re.split(r"<[^>]+>", document)) if t]


def _demo_html(code: str) -> str:
    project = pipeline.validate_only(DEMO)
    outcome = pipeline.compute(project, NOW)
    return render.build_report(project, outcome.judgement, now=NOW, version="t",
                               applications=outcome.applications, findings=outcome.findings,
                               otdr=outcome.otdr, language=code).html


# Catalogue texts with lower-case letters in the demo report spelled the same in the language
# (checked one by one; names in capitals such as OTDR, LSA and SHA-256 are not compared): the
# trade's names and units (OM/OS, dB, dBm, λ nm), the file name project.yaml, "Position" (shown
# under a context; this comparison looks it up without one), and words that are the
# language's own word too.
COMMON = {"OM1–OM5, OS1, OS1a, OS2", "Position", "dB", "dBm", "project.yaml", "λ nm"}
SPELLED_THE_SAME = {
    "de": COMMON | {"Name", "Status", "Transceiver"},
    "fr": COMMON | {"Application", "Applications", "Construction", "Date", "Instruments", "Page",
                    "Signature", "Site", "Source", "Verdict", "conn."},
    "es": COMMON | {"error"},
}


@pytest.fixture(scope="module")
def english_demo() -> str:
    return _demo_html("en")


@pytest.mark.parametrize("code, dates", [
    # first and last test day of the demo (14 and 17 April 2026) in CLDR's order (Babel 2.18)
    ("de", "14.04.2026 bis 17.04.2026"),
    ("fr", "du 14/04/2026 au 17/04/2026"),
    ("es", "del 14/4/2026 al 17/4/2026"),
])
def test_no_english_heading_or_label_remains_in_a_translated_demo_report(english_demo, code, dates):
    translated = _demo_html(code)
    lang = i18n.language(code)
    assert f'<html lang="{code}">' in translated
    # the English report's words: every text node that is a catalogue text (data is not)
    words = {ident for _, ident in (_key(m) for m in _template() if m.id)}
    words |= {text.format() for text in messages.TEXT.values() if not PLACEHOLDER.search(text)}
    english = {text for text in _texts(english_demo) if text in words}
    assert len(english) > 100  # the comparison covers the report's headings and labels
    same = {text for text in english if lang.gettext(text) == text}
    assert {text for text in same if re.search("[a-z]", text)} == SPELLED_THE_SAME[code]
    left = sorted(set(_texts(translated)) & (english - same))
    assert left == []
    # texts with placeholders: no English stretch of words between them remains either
    english_text, translated_text = " ".join(_texts(english_demo)), " ".join(_texts(translated))
    stretches = {piece.strip() for ident in words if PLACEHOLDER.search(ident)
                 for piece in PLACEHOLDER.split(ident)[::2]
                 if len(piece.strip()) >= 12 and piece.strip() in english_text}
    assert len(stretches) > 20
    assert sorted(piece for piece in stretches if piece in translated_text) == []
    # numbers with a decimal comma (CLDR via Babel 2.18), none in the English form
    cells = re.findall(r'<span class="num">([^<]*)</span>', translated)
    assert cells and all(re.fullmatch(r"−?-?\d+,\d\d", cell) for cell in cells), cells[:5]
    assert dates in translated


def test_the_english_report_is_the_one_of_the_project_language(english_demo):
    assert '<html lang="en">' in english_demo
    assert "2026-04-14 to 2026-04-17" in english_demo


def test_report_language_in_project_yaml_and_an_unknown_one(make_project):
    root = make_project({"project.yaml": _with_report("  language: fr\n")})
    project = pipeline.validate_only(root)
    assert project.report.language is ReportLanguage.FR
    doc = render.build_report(project, pipeline.compute(project, NOW).judgement, now=NOW, version="t")
    assert '<html lang="fr">' in doc.html and "Registre des liaisons" in doc.html
    # build --language overrides the project's language
    doc = render.build_report(project, pipeline.compute(project, NOW).judgement, now=NOW,
                              version="t", language="de")
    assert '<html lang="de">' in doc.html and "Streckenverzeichnis" in doc.html
    bad = make_project({"project.yaml": _with_report("  language: klingon\n")})
    with pytest.raises(InputError) as failure:
        pipeline.validate_only(bad)
    problems = [str(problem) for problem in failure.value.problems]
    assert len(problems) == 1 and "report.language" in problems[0] and "en, de, fr, es" in problems[0]


def _with_report(lines: str) -> str:
    from conftest import MINIMAL_PROJECT

    return MINIMAL_PROJECT["project.yaml"] + "report:\n" + lines


def test_a_projects_own_template_uses_the_same_translation_calls(make_project):
    """gettext, ngettext and {% trans %} of jinja2.ext.i18n, in the sandbox, in the report's language."""
    own = (
        '<p class="own">{{ _("Link register") }} | {% trans %}Appendix{% endtrans %} | '
        '{{ ngettext("{count} result", "{count} results", 3) }} | {{ t.links_heading }}</p>\n'
    )
    root = make_project({"project.yaml": _with_report("  language: de\n  templates: own\n"),
                         "own/partials/findings_cover.html.j2": own})
    project = pipeline.validate_only(root)
    doc = render.build_report(project, pipeline.compute(project, NOW).judgement, now=NOW, version="t")
    # the German catalogue's entries for these English texts
    assert ('<p class="own">Streckenverzeichnis | Anhang | {count} Ergebnisse | Streckenblätter</p>'
            in doc.html)


def test_terminal_output_and_input_errors_stay_english(make_project, capsys):
    from reportgen import cli

    root = make_project({"project.yaml": _with_report("  language: de\n"),
                         "links.csv": "link_id,end_a\nL1,Room 1\n"})
    assert cli.main(["check", str(root)]) == 2
    assert "expected" in capsys.readouterr().err


def test_the_page_stamp_and_its_font_cover_the_languages_characters():
    """The stamp writes WinAnsi (cp1252) text in DejaVu Sans: each language's sample
    characters and our translated stamp labels must encode and have a glyph."""
    from fontTools.ttLib import TTFont

    from reportgen.pdf.stamp import check_label_text, find_dejavu_sans

    samples = "äöüÄÖÜß éèêëàâçîïôûù ñáíóúü¿¡ «» “” ‘’ „‚ ·"
    labels = [messages.archive_page_label("0123abcd", i18n.language(code)).format(page=12, pages=34)
              for code in ("en", *LANGUAGES)]
    chars = check_label_text([samples, *labels])
    font = find_dejavu_sans()
    if font is None:
        pytest.skip("DejaVu Sans is not installed")
    cmap = TTFont(font).getBestCmap()
    assert [c for c in chars if c != " " and ord(c) not in cmap] == []
    assert labels[1] == "Prüfsumme 0123abcd · Seite 12 von 34"
    assert labels[2] == "Empreinte 0123abcd · Page 12 sur 34"
    assert labels[3] == "Huella 0123abcd · Página 12 de 34"


# ---------------------------------------------------------------- PDF and package (slow)


@pytest.mark.slow
def test_a_german_pdf_and_data_files_identical_to_the_english_build(make_project, tmp_path):
    """report.pdf follows the language (/Lang, XMP dc:language, outline, page stamp);
    results.csv and summary.json are byte for byte those of the English build."""
    import pypdf

    root = make_project()
    english, german = tmp_path / "en", tmp_path / "de"
    pipeline.build(root, english, jobs=1, cache=False)
    pipeline.build(root, german, jobs=1, cache=False, language="de")
    for name in ("results.csv", "summary.json"):
        assert (german / name).read_bytes() == (english / name).read_bytes()
    reader = pypdf.PdfReader(german / "report.pdf")
    assert reader.trailer["/Root"]["/Lang"] == "de"
    assert b"<dc:language><rdf:Bag><rdf:li>de</rdf:li></rdf:Bag></dc:language>" in \
        reader.trailer["/Root"]["/Metadata"].get_object().get_data()
    outline = [item.title for item in reader.outline if not isinstance(item, list)]
    assert outline[:4] == ["Abnahmeprotokoll Glasfaserstrecken", "Inhalt",
                           "Strecken mit Handlungsbedarf", "Streckenverzeichnis"]
    pages = len(reader.pages)
    assert f"Seite 1 von {pages}" in reader.pages[0].extract_text()
    assert f"Seite {pages} von {pages}" in reader.pages[-1].extract_text()
    english_outline = [item.title for item in pypdf.PdfReader(english / "report.pdf").outline
                       if not isinstance(item, list)]
    assert set(outline) & set(english_outline) == set()


@pytest.mark.slow
def test_the_wheel_carries_the_compiled_catalogues(tmp_path):
    """hatch_build.py compiles every .po into the wheel; the installed package reads the .mo."""
    import importlib.util
    import os
    import subprocess
    import sys
    import zipfile

    if importlib.util.find_spec("hatchling") is None:
        pytest.skip("hatchling (the build backend) is not installed")
    built = subprocess.run([sys.executable, "-m", "pip", "wheel", str(ROOT), "--no-deps",
                            "--no-build-isolation", "-w", str(tmp_path / "dist"), "-q"],
                           capture_output=True, text=True)
    assert built.returncode == 0, built.stderr
    wheel = next((tmp_path / "dist").glob("reportgen-*.whl"))
    names = zipfile.ZipFile(wheel).namelist()
    assert sorted(n for n in names if "/locale/" in n) == [
        f"reportgen/locale/{code}/LC_MESSAGES/reportgen.mo" for code in ("de", "es", "fr")]
    target = tmp_path / "site"
    installed = subprocess.run([sys.executable, "-m", "pip", "install", "--no-deps", "-q",
                                "--target", str(target), str(wheel)], capture_output=True, text=True)
    assert installed.returncode == 0, installed.stderr
    probe = ("from reportgen.report import i18n, messages\n"
             "assert not i18n.catalogue_path('fr').exists() and i18n.catalogue_path('fr', '.mo').is_file()\n"
             "print(i18n.language('fr').gettext(messages.PAGE_LABEL))\n")
    env = {**os.environ, "PYTHONPATH": str(target)}
    done = subprocess.run([sys.executable, "-c", probe], cwd=tmp_path, env=env,
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "Page {page} sur {pages}"
