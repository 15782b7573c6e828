"""Every value in the shipped data files against tables typed here from the published sources.

The data files are ``reportgen/data/limits/*.yaml`` (the built-in limit sets) and
``reportgen/data/applications.yaml`` (the application table). Each value below is typed
from the published document named beside it, with its status as the project's reference
notes give it: "verified, secondary" = read in a public page reproducing the standard's
table; "derived" = arithmetic on such values or a stated rule; "from memory" = recalled
without the document at hand. Nothing here is copied from the data files or computed by
the code under test.

The coverage tests fail when a data file holds a value, fiber type, wavelength or entry
that the typed tables below do not: adding a value to a data file means adding it here,
typed from its source.
"""
from __future__ import annotations

import math
from importlib import resources
from pathlib import Path
from typing import Any

import pytest
import yaml

from reportgen.inputs.limits import builtin_ids, load_builtin_limit_set
from reportgen.inputs.project import load_project

VERIFIED = "verified, secondary"
MEMORY = "from memory"
DERIVED = "derived"
# Words of the status vocabulary: a data status says one of them only where the typed
# status below says it too (and the other way round).
STATUS_WORDS = (VERIFIED, MEMORY, DERIVED, "LOW confidence", "engineered link")

ROOT = Path(__file__).resolve().parent.parent


def _data_text(*parts: str) -> str:
    return resources.files("reportgen").joinpath("data", *parts).read_text(encoding="utf-8")


def _status_agrees(text: str, expected: tuple[str, ...]) -> list[str]:
    """What is wrong with a data status ``text`` against the typed phrases ``expected``."""
    wrong = [f"missing {phrase!r}" for phrase in expected if phrase not in text]
    for word in STATUS_WORDS:
        typed = any(word in phrase for phrase in expected)
        if (word in text) != typed:
            wrong.append(f"{word!r} {'in the data but not typed' if not typed else 'typed but not in the data'}")
    return wrong


# ====================================================================== limit sets
# (set id, key path) -> (value, status phrases the set's citation must contain, source)
# Key paths: connection_db, splice_db, attenuation_db_per_km.FIBER.NM,
# attenuation_db_per_km_outside.FIBER.NM. Sources: reference-values §1 (attenuation)
# and §2 (connection and splice allowances).

_ISO17 = "ISO/IEC 11801-1:2017, cabled optical fibre attenuation table"
_ISO02 = "ISO/IEC 11801:2002 (with its 2008 amendment), cabled optical fibre attenuation table"
_TIA_C3 = "ANSI/TIA-568-C.3 (2008), cabled fiber attenuation table"
_TIA_D = "ANSI/TIA-568.3-D (2016), cabled fiber attenuation table"
_ISO_OM12 = "verified, secondary against the 2002/2008 edition"

LIMIT_VALUES: dict[tuple[str, str], tuple[float, tuple[str, ...], str]] = {
    # ---- ISO/IEC 11801-1:2017
    ("iso-11801-1", "connection_db"): (0.75, (VERIFIED,), "ISO/IEC 11801-1:2017, mated connection maximum"),
    ("iso-11801-1", "splice_db"): (0.3, (VERIFIED,), "ISO/IEC 11801-1:2017, splice maximum"),
    ("iso-11801-1", "attenuation_db_per_km.OM1.850"): (3.5, (_ISO_OM12,), _ISO17 + ", OM1/OM2 (existing installations)"),
    ("iso-11801-1", "attenuation_db_per_km.OM1.1300"): (1.5, (_ISO_OM12,), _ISO17 + ", OM1/OM2 (existing installations)"),
    ("iso-11801-1", "attenuation_db_per_km.OM2.850"): (3.5, (_ISO_OM12,), _ISO17 + ", OM1/OM2 (existing installations)"),
    ("iso-11801-1", "attenuation_db_per_km.OM2.1300"): (1.5, (_ISO_OM12,), _ISO17 + ", OM1/OM2 (existing installations)"),
    ("iso-11801-1", "attenuation_db_per_km.OM3.850"): (3.5, ("850 nm " + VERIFIED,), _ISO17 + ", OM3/OM4"),
    ("iso-11801-1", "attenuation_db_per_km.OM3.1300"): (1.5, ("1300 nm " + MEMORY,), _ISO17 + ", OM3/OM4"),
    ("iso-11801-1", "attenuation_db_per_km.OM4.850"): (3.5, ("850 nm " + VERIFIED,), _ISO17 + ", OM3/OM4"),
    ("iso-11801-1", "attenuation_db_per_km.OM4.1300"): (1.5, ("1300 nm " + MEMORY,), _ISO17 + ", OM3/OM4"),
    ("iso-11801-1", "attenuation_db_per_km.OM5.850"): (3.0, ("850 nm " + VERIFIED,), _ISO17 + ", OM5"),
    ("iso-11801-1", "attenuation_db_per_km.OM5.953"): (2.3, ("953 and 1300 nm " + MEMORY,), _ISO17 + ", OM5"),
    ("iso-11801-1", "attenuation_db_per_km.OM5.1300"): (1.5, ("953 and 1300 nm " + MEMORY,), _ISO17 + ", OM5"),
    ("iso-11801-1", "attenuation_db_per_km.OS1a.1310"): (1.0, (VERIFIED,), _ISO17 + ", OS1a"),
    ("iso-11801-1", "attenuation_db_per_km.OS1a.1383"): (1.0, (VERIFIED,), _ISO17 + ", OS1a"),
    ("iso-11801-1", "attenuation_db_per_km.OS1a.1550"): (1.0, (VERIFIED,), _ISO17 + ", OS1a"),
    ("iso-11801-1", "attenuation_db_per_km.OS2.1310"): (0.4, (VERIFIED,), _ISO17 + ", OS2"),
    ("iso-11801-1", "attenuation_db_per_km.OS2.1383"): (0.4, (VERIFIED,), _ISO17 + ", OS2"),
    ("iso-11801-1", "attenuation_db_per_km.OS2.1550"): (0.4, (VERIFIED,), _ISO17 + ", OS2"),
    # ---- ISO/IEC 11801:2002 (OS1 at 1383 nm: not specified by this edition)
    ("iso-11801-2002", "connection_db"): (0.75, (VERIFIED,), "ISO/IEC 11801 family, mated connection maximum"),
    ("iso-11801-2002", "splice_db"): (0.3, (VERIFIED,), "ISO/IEC 11801 family, splice maximum"),
    ("iso-11801-2002", "attenuation_db_per_km.OM1.850"): (3.5, (VERIFIED,), _ISO02 + ", multimode"),
    ("iso-11801-2002", "attenuation_db_per_km.OM1.1300"): (1.5, (VERIFIED,), _ISO02 + ", multimode"),
    ("iso-11801-2002", "attenuation_db_per_km.OM2.850"): (3.5, (VERIFIED,), _ISO02 + ", multimode"),
    ("iso-11801-2002", "attenuation_db_per_km.OM2.1300"): (1.5, (VERIFIED,), _ISO02 + ", multimode"),
    ("iso-11801-2002", "attenuation_db_per_km.OM3.850"): (3.5, (VERIFIED,), _ISO02 + ", multimode"),
    ("iso-11801-2002", "attenuation_db_per_km.OM3.1300"): (1.5, (VERIFIED,), _ISO02 + ", multimode"),
    ("iso-11801-2002", "attenuation_db_per_km.OS1.1310"): (1.0, (VERIFIED,), _ISO02 + ", OS1"),
    ("iso-11801-2002", "attenuation_db_per_km.OS1.1550"): (1.0, (VERIFIED,), _ISO02 + ", OS1"),
    # ---- ANSI/TIA-568-C.3 (2008)
    ("tia-568-c.3", "connection_db"): (0.75, (VERIFIED,), "ANSI/TIA-568-C.3, mated connector pair maximum"),
    ("tia-568-c.3", "splice_db"): (0.3, (VERIFIED,), "ANSI/TIA-568-C.3, splice maximum"),
    **{("tia-568-c.3", f"attenuation_db_per_km.{fiber}.{nm}"): (alpha, (VERIFIED,), _TIA_C3 + ", all multimode")
       for fiber in ("OM1", "OM2", "OM3", "OM4") for nm, alpha in ((850, 3.5), (1300, 1.5))},
    **{("tia-568-c.3", f"attenuation_db_per_km.{fiber}.{nm}"): (
        1.0, (VERIFIED, "inside/outside split " + MEMORY), _TIA_C3 + ", single-mode inside-plant cable")
       for fiber in ("OS1", "OS1a", "OS2") for nm in (1310, 1550)},
    **{("tia-568-c.3", f"attenuation_db_per_km_outside.{fiber}.{nm}"): (
        0.5, (VERIFIED,), _TIA_C3 + ", single-mode outside-plant and indoor-outdoor cable")
       for fiber in ("OS1", "OS1a", "OS2") for nm in (1310, 1550)},
    # ---- ANSI/TIA-568.3-D (2016): every value from memory
    ("tia-568.3-d", "connection_db"): (0.75, (VERIFIED,), "ANSI/TIA-568.3-D, mated connector pair maximum"),
    ("tia-568.3-d", "splice_db"): (0.3, (VERIFIED,), "ANSI/TIA-568.3-D, splice maximum"),
    **{("tia-568.3-d", f"attenuation_db_per_km.{fiber}.{nm}"): (alpha, (MEMORY,), _TIA_D + ", OM1/OM2")
       for fiber in ("OM1", "OM2") for nm, alpha in ((850, 3.5), (1300, 1.5))},
    **{("tia-568.3-d", f"attenuation_db_per_km.{fiber}.{nm}"): (alpha, (MEMORY,), _TIA_D + ", OM3/OM4/OM5")
       for fiber in ("OM3", "OM4") for nm, alpha in ((850, 3.0), (1300, 1.5))},
    ("tia-568.3-d", "attenuation_db_per_km.OM5.850"): (3.0, (MEMORY,), _TIA_D + ", OM3/OM4/OM5"),
    ("tia-568.3-d", "attenuation_db_per_km.OM5.953"): (2.3, (MEMORY,), _TIA_D + ", OM5"),
    ("tia-568.3-d", "attenuation_db_per_km.OM5.1300"): (1.5, (MEMORY,), _TIA_D + ", OM3/OM4/OM5"),
    **{("tia-568.3-d", f"attenuation_db_per_km.{fiber}.{nm}"): (
        0.5, (MEMORY + ", LOW confidence",), _TIA_D + ", single-mode inside-plant (may still be 1.0)")
       for fiber in ("OS1", "OS1a", "OS2") for nm in (1310, 1550)},
    **{("tia-568.3-d", f"attenuation_db_per_km_outside.{fiber}.{nm}"): (
        0.5, (MEMORY,), _TIA_D + ", single-mode outside-plant and indoor-outdoor")
       for fiber in ("OS1", "OS1a", "OS2") for nm in (1310, 1383, 1550)},
}

# Each set's `source` names the document by its published title.
LIMIT_SET_DOCUMENTS = {
    # ISO/IEC 11801-1:2017 title page, as shown in public standards catalogues (verified, secondary)
    "iso-11801-1": "ISO/IEC 11801-1:2017, Information technology, Generic cabling for customer "
                   "premises, Part 1: General requirements",
    # ISO/IEC 11801:2002 title (verified, secondary)
    "iso-11801-2002": "ISO/IEC 11801:2002, Information technology, Generic cabling for customer premises",
    # ANSI/TIA-568-C.3 title (from memory)
    "tia-568-c.3": "ANSI/TIA-568-C.3 (2008), Optical Fiber Cabling Components Standard",
    # ANSI/TIA-568.3-D title (from memory)
    "tia-568.3-d": "ANSI/TIA-568.3-D (2016), Optical Fiber Cabling and Components Standard",
}


def _limit_file_values(set_id: str) -> dict[str, Any]:
    """Every value the limit-set file holds, by key path (read from the file as written)."""
    data = yaml.safe_load(_data_text("limits", f"{set_id}.yaml"))
    values: dict[str, Any] = {key: data[key] for key in ("connection_db", "splice_db") if key in data}
    for table in ("attenuation_db_per_km", "attenuation_db_per_km_outside"):
        for fiber, row in (data.get(table) or {}).items():
            for nm, alpha in row.items():
                values[f"{table}.{fiber}.{nm}"] = alpha
    return values


def _citation_key(path: str) -> str:
    """The key path whose citation a value takes: its table and fiber, or the allowance itself."""
    return path.rpartition(".")[0] if path.count(".") == 2 else path


def test_typed_limit_tables_name_every_built_in_set():
    assert sorted({set_id for set_id, _ in LIMIT_VALUES}) == builtin_ids() == sorted(LIMIT_SET_DOCUMENTS)


@pytest.mark.parametrize("set_id", sorted(LIMIT_SET_DOCUMENTS))
def test_every_limit_set_value_is_typed_here(set_id):
    # Coverage: a value (or fiber type, or wavelength) added to the file without a typed
    # counterpart here fails, and so does a typed value the file lost.
    in_file = set(_limit_file_values(set_id))
    typed = {path for sid, path in LIMIT_VALUES if sid == set_id}
    assert sorted(in_file - typed) == [], "values in the data file without a typed source value"
    assert sorted(typed - in_file) == [], "typed values missing from the data file"


@pytest.mark.parametrize(("set_id", "path"), sorted(LIMIT_VALUES))
def test_limit_set_value_matches_its_source(set_id, path):
    expected, _, source = LIMIT_VALUES[(set_id, path)]
    got = _limit_file_values(set_id).get(path)
    assert got == expected, f"{set_id} {path}: {got!r} in the data, {expected!r} in {source}"


@pytest.mark.parametrize(("set_id", "path"), sorted(LIMIT_VALUES))
def test_limit_set_citation_carries_the_status(set_id, path):
    # The citation printed beside a value (the nearest `sources` entry above its key
    # path) must say the value's status, and say "from memory" only where it is.
    _, phrases, source = LIMIT_VALUES[(set_id, path)]
    limits = load_builtin_limit_set(set_id)
    text = limits.source_for(_citation_key(path))
    governed = [status for (sid, other), (_, status, _) in LIMIT_VALUES.items()
                if sid == set_id and limits.source_for(_citation_key(other)) == text]
    wrong = [f"missing {phrase!r}" for phrase in phrases if phrase not in text]
    for word in STATUS_WORDS:
        if word in text and not any(word in phrase for group in governed for phrase in group):
            wrong.append(f"says {word!r}, but none of the values it covers is typed so")
    assert wrong == [], f"{set_id} {path} ({source}): citation {text!r}: {wrong}"


@pytest.mark.parametrize("set_id", sorted(LIMIT_SET_DOCUMENTS))
def test_limit_set_names_its_document_by_title(set_id):
    assert LIMIT_SET_DOCUMENTS[set_id] in load_builtin_limit_set(set_id).source


# ================================================================ application table
# Per (application, fiber type): (max length m, min loss dB or None, max loss dB,
# status phrases the row's status must contain). Source per entry in the comment above
# it; statuses from reference-values §4.

_OM5 = "OM5 meets OM4 at 850 nm (from memory)"  # TIA-492AAAE (from memory), a design rule of the table
_SM = ("OS1", "OS1a", "OS2")  # IEEE and ITU-T specify single-mode channels by loss and length
_PON_REACH = "length from memory"  # 20 km physical reach, ITU-T G.984.1 / G.987.1 (from memory)

APP_ROWS: dict[tuple[str, str], tuple[float, float | None, float, tuple[str, ...]]] = {
    # IEEE 802.3 Table 38-7 (1000BASE-SX link power budget), channel insertion loss worked at
    # 830 nm: 62.5/125 µm 200 MHz·km (OM1) 275 m 2.60 dB; 50/125 µm 500 MHz·km (OM2) 550 m
    # 3.56 dB (verified, secondary). OM3/OM4/OM5 take the OM2 row (derived, design rule).
    ("1000BASE-SX", "OM1"): (275, None, 2.60, (VERIFIED, "Table 38-7")),
    ("1000BASE-SX", "OM2"): (550, None, 3.56, (VERIFIED, "Table 38-7")),
    ("1000BASE-SX", "OM3"): (550, None, 3.56, (DERIVED, VERIFIED, "Table 38-7")),
    ("1000BASE-SX", "OM4"): (550, None, 3.56, (DERIVED, VERIFIED, "Table 38-7")),
    ("1000BASE-SX", "OM5"): (550, None, 3.56, (DERIVED, VERIFIED, "Table 38-7")),
    # IEEE 802.3 cl. 38, 1000BASE-LX: 5 km (verified, secondary), 4.57 dB (from memory)
    **{("1000BASE-LX", f): (5000, None, 4.57, ("length " + VERIFIED, "loss " + MEMORY)) for f in _SM},
    # IEEE 802.3 cl. 52, 10GBASE-SR: OM1 33 m 1.6 dB, OM2 82 m 1.8 dB (from memory);
    # OM3 300 m 2.6 dB (verified, secondary); OM4 400 m 2.9 dB (verified, secondary), an
    # engineered link; OM5 takes OM4's row (derived).
    ("10GBASE-SR", "OM1"): (33, None, 1.6, (MEMORY,)),
    ("10GBASE-SR", "OM2"): (82, None, 1.8, (MEMORY,)),
    ("10GBASE-SR", "OM3"): (300, None, 2.6, (VERIFIED,)),
    ("10GBASE-SR", "OM4"): (400, None, 2.9, (VERIFIED, "engineered link")),
    ("10GBASE-SR", "OM5"): (400, None, 2.9, (DERIVED, VERIFIED, "engineered link", _OM5)),
    # IEEE 802.3 cl. 52, 10GBASE-LR: 10 km, 6.2 dB (from memory; equals Tx min − Rx min, derived
    # from the verified, secondary clause 52 powers)
    **{("10GBASE-LR", f): (10000, None, 6.2, (MEMORY, DERIVED, VERIFIED)) for f in _SM},
    # IEEE 802.3 cl. 52, 10GBASE-ER: 30 km and 10.9 dB (from memory); 11.0 dB for the 40 km
    # engineered link (verified, secondary, not used)
    **{("10GBASE-ER", f): (30000, None, 10.9, (MEMORY, VERIFIED, "engineered link")) for f in _SM},
    # IEEE 802.3 cl. 112, 25GBASE-SR: OM3 70 m 1.8 dB (from memory); OM4 100 m 1.9 dB
    # (verified, secondary)
    ("25GBASE-SR", "OM3"): (70, None, 1.8, (MEMORY,)),
    ("25GBASE-SR", "OM4"): (100, None, 1.9, (VERIFIED,)),
    ("25GBASE-SR", "OM5"): (100, None, 1.9, (DERIVED, VERIFIED, _OM5)),
    # IEEE 802.3 cl. 86, 40GBASE-SR4: OM3 100 m (verified, secondary) 1.9 dB (from memory);
    # OM4 150 m 1.5 dB (verified, secondary; 1.0 dB connection allocation)
    ("40GBASE-SR4", "OM3"): (100, None, 1.9, ("length " + VERIFIED, "loss " + MEMORY)),
    ("40GBASE-SR4", "OM4"): (150, None, 1.5, (VERIFIED,)),
    ("40GBASE-SR4", "OM5"): (150, None, 1.5, (DERIVED, VERIFIED, _OM5)),
    # IEEE 802.3 cl. 87, 40GBASE-LR4: 10 km, 6.7 dB (from memory)
    **{("40GBASE-LR4", f): (10000, None, 6.7, (MEMORY,)) for f in _SM},
    # IEEE 802.3 cl. 95, 100GBASE-SR4: OM3 70 m 1.8 dB, OM4 100 m 1.9 dB (lengths verified,
    # secondary; losses from memory)
    ("100GBASE-SR4", "OM3"): (70, None, 1.8, ("length " + VERIFIED, "loss " + MEMORY)),
    ("100GBASE-SR4", "OM4"): (100, None, 1.9, ("length " + VERIFIED, "loss " + MEMORY)),
    ("100GBASE-SR4", "OM5"): (100, None, 1.9, (DERIVED, "length " + VERIFIED, "loss " + MEMORY, _OM5)),
    # IEEE 802.3 cl. 88, 100GBASE-LR4: 10 km, 6.3 dB (from memory)
    **{("100GBASE-LR4", f): (10000, None, 6.3, (MEMORY,)) for f in _SM},
    # IEEE 802.3 cl. 138, 400GBASE-SR8: OM3 70 m 1.8 dB, OM4 100 m 1.9 dB (from memory)
    ("400GBASE-SR8", "OM3"): (70, None, 1.8, (MEMORY,)),
    ("400GBASE-SR8", "OM4"): (100, None, 1.9, (MEMORY,)),
    ("400GBASE-SR8", "OM5"): (100, None, 1.9, (DERIVED, MEMORY, _OM5)),
    # IEEE 802.3 cl. 124, 400GBASE-DR4: 500 m, 3.0 dB (from memory)
    **{("400GBASE-DR4", f): (500, None, 3.0, (MEMORY,)) for f in _SM},
    # INCITS FC-PI-4, 8GFC: OM2 50 m 1.68 dB, OM3 150 m 2.04 dB, OM4 190 m 2.19 dB (verified, secondary)
    ("8GFC", "OM2"): (50, None, 1.68, (VERIFIED,)),
    ("8GFC", "OM3"): (150, None, 2.04, (VERIFIED,)),
    ("8GFC", "OM4"): (190, None, 2.19, (VERIFIED,)),
    ("8GFC", "OM5"): (190, None, 2.19, (DERIVED, VERIFIED, _OM5)),
    # INCITS FC-PI-5, 16GFC: OM2 35 m 1.63 dB, OM3 100 m 1.86 dB, OM4 125 m 1.95 dB (verified, secondary)
    ("16GFC", "OM2"): (35, None, 1.63, (VERIFIED,)),
    ("16GFC", "OM3"): (100, None, 1.86, (VERIFIED,)),
    ("16GFC", "OM4"): (125, None, 1.95, (VERIFIED,)),
    ("16GFC", "OM5"): (125, None, 1.95, (DERIVED, VERIFIED, _OM5)),
    # INCITS FC-PI-6, 32GFC: OM2 20 m 1.57 dB, OM3 70 m 1.75 dB, OM4 100 m 1.86 dB (verified, secondary)
    ("32GFC", "OM2"): (20, None, 1.57, (VERIFIED,)),
    ("32GFC", "OM3"): (70, None, 1.75, (VERIFIED,)),
    ("32GFC", "OM4"): (100, None, 1.86, (VERIFIED,)),
    ("32GFC", "OM5"): (100, None, 1.86, (DERIVED, VERIFIED, _OM5)),
    # ITU-T G.984.2 optical path loss classes A 5–20, B 10–25, C 15–30 dB (verified, secondary)
    **{("PON-A", f): (20000, 5, 20, ("loss " + VERIFIED, _PON_REACH)) for f in _SM},
    **{("PON-B", f): (20000, 10, 25, ("loss " + VERIFIED, _PON_REACH)) for f in _SM},
    **{("PON-C", f): (20000, 15, 30, ("loss " + VERIFIED, _PON_REACH)) for f in _SM},
    # ITU-T G.984.2 amendments, B+ 13–28 dB, C+ 17–32 dB (max verified, secondary; min from memory)
    **{("PON-B+", f): (20000, 13, 28, ("max loss " + VERIFIED, "min loss and length " + MEMORY)) for f in _SM},
    **{("PON-C+", f): (20000, 17, 32, ("max loss " + VERIFIED, "min loss and length " + MEMORY)) for f in _SM},
    # ITU-T G.987.2 / G.9807.1, N1 14–29, N2 16–31, E1 18–33 dB (max verified, secondary;
    # min from memory); E2 20–35 dB (from memory)
    **{("PON-N1", f): (20000, 14, 29, ("max loss " + VERIFIED, "min loss and length " + MEMORY)) for f in _SM},
    **{("PON-N2", f): (20000, 16, 31, ("max loss " + VERIFIED, "min loss and length " + MEMORY)) for f in _SM},
    # E1/E2: the class definition (G.987.2) sets no reach, so none is checked (None)
    **{("PON-E1", f): (None, 18, 33, ("max loss " + VERIFIED, "min loss " + MEMORY,
                                      "no reach in the class definition")) for f in _SM},
    **{("PON-E2", f): (None, 20, 35, (MEMORY, "no reach in the class definition")) for f in _SM},
}

# Per application: family, the document cited, operating wavelengths [nm], test
# wavelengths standing for them [nm], fibers per channel.
APP_ENTRIES: dict[str, tuple[str, str, tuple[int, ...], tuple[int, ...], int]] = {
    # IEEE 802.3 clause per PMD (as reference-values §4 names them);
    # wavelengths: 850 nm short-reach, 1310 nm long-reach, 1550 nm extended-reach (common
    # practice); lane wavelengths of the WDM PMDs and fiber counts of the parallel PMDs
    # (4 or 8 lanes each way) from memory; the test wavelength nearest the operating one
    # stands for it (common practice).
    "1000BASE-SX": ("Ethernet", "IEEE 802.3 cl. 38", (850,), (850,), 2),
    "1000BASE-LX": ("Ethernet", "IEEE 802.3 cl. 38", (1310,), (1310,), 2),
    "10GBASE-SR": ("Ethernet", "IEEE 802.3 cl. 52", (850,), (850,), 2),
    "10GBASE-LR": ("Ethernet", "IEEE 802.3 cl. 52", (1310,), (1310,), 2),
    "10GBASE-ER": ("Ethernet", "IEEE 802.3 cl. 52", (1550,), (1550,), 2),
    "25GBASE-SR": ("Ethernet", "IEEE 802.3 cl. 112", (850,), (850,), 2),
    "40GBASE-SR4": ("Ethernet", "IEEE 802.3 cl. 86", (850,), (850,), 8),
    "40GBASE-LR4": ("Ethernet", "IEEE 802.3 cl. 87", (1271, 1291, 1311, 1331), (1310,), 2),
    "100GBASE-SR4": ("Ethernet", "IEEE 802.3 cl. 95", (850,), (850,), 8),
    "100GBASE-LR4": ("Ethernet", "IEEE 802.3 cl. 88", (1295, 1300, 1305, 1310), (1310,), 2),
    "400GBASE-SR8": ("Ethernet", "IEEE 802.3 cl. 138", (850,), (850,), 16),
    "400GBASE-DR4": ("Ethernet", "IEEE 802.3 cl. 124", (1310,), (1310,), 8),
    # INCITS FC-PI-4 / -5 / -6 (part numbers from memory), 850 nm short-wave, duplex
    "8GFC": ("Fibre Channel", "INCITS FC-PI-4", (850,), (850,), 2),
    "16GFC": ("Fibre Channel", "INCITS FC-PI-5", (850,), (850,), 2),
    "32GFC": ("Fibre Channel", "INCITS FC-PI-6", (850,), (850,), 2),
    # ITU-T G.984.2 (GPON: 1310 nm up, 1490 nm down) and G.987.2 / G.9807.1 (XG(S)-PON:
    # 1270 nm up, 1577 nm down), one fiber (from memory); each class is tested at the two
    # wavelengths its standard names, as PON test sets measure (issue: no stand-in wavelengths)
    **{f"PON-{c}": ("PON", "ITU-T G.984.2", (1310, 1490), (1310, 1490), 1) for c in ("A", "B", "B+", "C", "C+")},
    **{f"PON-{c}": ("PON", "ITU-T G.987.2 / G.9807.1", (1270, 1577), (1270, 1577), 1)
       for c in ("N1", "N2", "E1", "E2")},
}


def _app_file() -> dict[str, Any]:
    return yaml.safe_load(_data_text("applications.yaml"))


def _app_file_rows() -> dict[tuple[str, str], dict[str, Any]]:
    """Every fiber row of the application table file, by (application, fiber type)."""
    rows = {}
    for entry in _app_file()["applications"]:
        for row in entry["fibers"]:
            for fiber in row["types"]:
                rows[(entry["id"], fiber)] = row
    return rows


def test_every_application_row_is_typed_here():
    in_file = set(_app_file_rows())
    assert sorted(in_file - set(APP_ROWS)) == [], "rows in the data file without a typed source value"
    assert sorted(set(APP_ROWS) - in_file) == [], "typed rows missing from the data file"


def test_every_application_entry_and_row_field_is_typed_here():
    entries = _app_file()["applications"]
    assert [entry["id"] for entry in entries] == list(APP_ENTRIES)
    entry_keys = {"id", "family", "source", "operating_nm", "test_wavelengths_nm", "strands", "fibers"}
    row_keys = {"types", "max_length_m", "min_loss_db", "max_loss_db", "status"}
    for entry in entries:
        assert set(entry) <= entry_keys, f"{entry['id']}: a key this test does not check"
        for row in entry["fibers"]:
            assert set(row) <= row_keys, f"{entry['id']}: a row key this test does not check"


@pytest.mark.parametrize(("application", "fiber"), sorted(APP_ROWS))
def test_application_row_matches_its_source(application, fiber):
    max_length_m, min_loss_db, max_loss_db, _ = APP_ROWS[(application, fiber)]
    row = _app_file_rows()[(application, fiber)]
    got = (row["max_length_m"], row.get("min_loss_db"), row["max_loss_db"])
    assert got == (max_length_m, min_loss_db, max_loss_db)


@pytest.mark.parametrize(("application", "fiber"), sorted(APP_ROWS))
def test_application_row_status_says_what_the_source_says(application, fiber):
    phrases = APP_ROWS[(application, fiber)][3]
    status = _app_file_rows()[(application, fiber)]["status"]
    assert _status_agrees(status, phrases) == [], status


@pytest.mark.parametrize("application", list(APP_ENTRIES))
def test_application_entry_matches_its_source(application):
    family, document, operating_nm, test_nm, strands = APP_ENTRIES[application]
    entry = next(e for e in _app_file()["applications"] if e["id"] == application)
    assert (entry["family"], tuple(entry["operating_nm"]), tuple(entry["test_wavelengths_nm"]),
            entry["strands"]) == (family, operating_nm, test_nm, strands)
    assert document in entry["source"]


# ============================================== consistency with published derived figures


def test_ieee_10gbase_sr_om3_is_2_6_db_from_the_channel_model():
    # IEEE 802.3 multimode channel model (verified, secondary): 3.5 dB/km at 850 nm plus a
    # 1.5 dB connection allocation. OM3, 300 m: 0.3 × 3.5 + 1.5 = 2.55 dB, published as 2.6 dB.
    # OM4, 400 m: 0.4 × 3.5 + 1.5 = 2.90 dB, published as 2.9 dB.
    for fiber, length_m, published_db in (("OM3", 300, 2.6), ("OM4", 400, 2.9)):
        model_db = length_m / 1000 * 3.5 + 1.5
        assert abs(model_db - published_db) <= 0.05 + 1e-9
        row = _app_file_rows()[("10GBASE-SR", fiber)]
        assert (row["max_length_m"], row["max_loss_db"]) == (length_m, published_db)


# IEEE 802.3 Table 38-7, 1000BASE-SX link power budget (verified, secondary): fiber, length
# [km], channel insertion loss [dB], and the cable attenuation at 830 nm the budget is worked
# with (about 4.0 dB/km for 62.5 µm, 3.75 dB/km for 50 µm; reference-values §4) plus 1.5 dB.
TABLE_38_7 = (
    ("62.5/125 µm 160 MHz·km", 220, 2.38, 4.0),
    ("62.5/125 µm 200 MHz·km (OM1)", 275, 2.60, 4.0),
    ("50/125 µm 400 MHz·km", 500, 3.37, 3.75),
    ("50/125 µm 500 MHz·km (OM2)", 550, 3.56, 3.75),
)


@pytest.mark.parametrize(("fiber", "length_m", "channel_db", "alpha_830"), TABLE_38_7,
                         ids=[row[0] for row in TABLE_38_7])
def test_ieee_1000base_sx_table_38_7_is_the_830_nm_budget(fiber, length_m, channel_db, alpha_830):
    # The published channel losses are the 830 nm cable loss plus 1.5 dB, to the hundredth
    # (3.375 is printed 3.37): a consistency check of the typed table itself.
    assert abs(length_m / 1000 * alpha_830 + 1.5 - channel_db) <= 0.005 + 1e-9


def test_ieee_1000base_sx_rows_are_table_38_7_not_the_850_nm_cable_model():
    # OM1 is the 200 MHz·km 62.5 µm row: 275 m, 2.60 dB; OM2 (and OM3/OM4/OM5 by the table's
    # rule) the 500 MHz·km 50 µm row: 550 m, 3.56 dB. The 850 nm recomputation
    # (0.275 × 3.75 + 1.5 = 2.53, 0.55 × 3.5 + 1.5 = 3.43) is not the published figure.
    rows = _app_file_rows()
    assert (rows[("1000BASE-SX", "OM1")]["max_length_m"], rows[("1000BASE-SX", "OM1")]["max_loss_db"]) == (
        TABLE_38_7[1][1], TABLE_38_7[1][2])
    for fiber in ("OM2", "OM3", "OM4", "OM5"):
        row = rows[("1000BASE-SX", fiber)]
        assert (row["max_length_m"], row["max_loss_db"]) == (TABLE_38_7[3][1], TABLE_38_7[3][2])


# ITU-T optical path loss classes, (min, max) dB: G.984.2 A 5–20, B 10–25, C 15–30 (verified,
# secondary); B+ 13–28, C+ 17–32 (max verified, secondary; min from memory); G.987.2 /
# G.9807.1 N1 14–29, N2 16–31, E1 18–33 (max verified, secondary; min from memory);
# E2 20–35 (from memory).
PON_WINDOWS = {"PON-A": (5, 20), "PON-B": (10, 25), "PON-C": (15, 30), "PON-B+": (13, 28),
               "PON-C+": (17, 32), "PON-N1": (14, 29), "PON-N2": (16, 31), "PON-E1": (18, 33),
               "PON-E2": (20, 35)}


@pytest.mark.parametrize("application", list(PON_WINDOWS))
def test_pon_class_window(application):
    low, high = PON_WINDOWS[application]
    # every class of these recommendations spans 15 dB (derived from the windows above)
    assert high - low == 15
    for fiber in _SM:
        row = _app_file_rows()[(application, fiber)]
        assert (row["min_loss_db"], row["max_loss_db"]) == (low, high)


# IEEE 802.3 clause 52 average powers, dBm (verified, secondary; reference-values §5):
# launch max (normative), launch min (informative), receive max = overload (normative),
# average receive power min (informative; not the OMA receiver sensitivity).
CLAUSE_52 = {"sr-10g": (850, -1.0, -7.3, -1.0, -9.9),
             "lr-10g": (1310, 0.5, -8.2, 0.5, -14.4),
             "er-10g": (1550, 4.0, -4.7, -1.0, -15.8)}


def test_demo_transceivers_are_the_clause_52_average_powers():
    project = load_project(ROOT / "demo_project")
    assert sorted(project.transceivers) == sorted(CLAUSE_52)
    for key, (wavelength_nm, tx_max, tx_min, rx_max, rx_min) in CLAUSE_52.items():
        optic = project.transceivers[key]
        assert (optic.wavelength_nm, optic.tx_max_dbm, optic.tx_min_dbm, optic.rx_overload_dbm,
                optic.rx_min_average_dbm) == (wavelength_nm, tx_max, tx_min, rx_max, rx_min)


def test_demo_transceivers_use_the_receive_power_minimum_key():
    # Clause 52's minimum is an average receive power (informative), not the sensitivity,
    # which the clause gives in OMA: the demo names it for what it is.
    data = yaml.safe_load((ROOT / "demo_project" / "project.yaml").read_text(encoding="utf-8"))
    for key, entry in data["transceivers"].items():
        assert "rx_min_average_dbm" in entry and "rx_sensitivity_dbm" not in entry, key


@pytest.mark.parametrize(("application", "key"), [("10GBASE-SR", "sr-10g"), ("10GBASE-LR", "lr-10g")])
def test_clause_52_tx_min_minus_rx_min_is_the_channel_loss(application, key):
    # reference-values §5: Tx min − Rx min equals the channel loss for SR (OM3, 2.6 dB) and
    # LR (6.2 dB); IEEE 802.3 cl. 52 (verified, secondary / from memory for LR's 6.2 dB).
    _, _, tx_min, _, rx_min = CLAUSE_52[key]
    published_db = {"10GBASE-SR": 2.6, "10GBASE-LR": 6.2}[application]
    assert math.isclose(tx_min - rx_min, published_db, abs_tol=1e-9)
    fiber = "OM3" if application == "10GBASE-SR" else "OS2"
    assert _app_file_rows()[(application, fiber)]["max_loss_db"] == published_db
