"""The SR-4731 reader and writer (reportgen/inputs/sor.py): our files read back exactly, an
independent open reader (otdrparser, BSD-2-Clause, a test-only dependency) reads them to the same
values, and damaged files give clear errors."""
from __future__ import annotations

import io
import struct
from dataclasses import replace

import numpy as np
import otdrparser
import pytest

from reportgen.inputs.sor import SorError, SorEvent, SorFile, crc16_ccitt, quantised, read_sor, write_sor

EVENTS = (
    SorEvent(0, 0.0, -52.0, "1F9999LS"),
    SorEvent(9790, 0.31, -47.5, "1F9999LS", slope_db_per_km=0.33),
    SorEvent(24480, 0.07, 0.0, "0F9999LS", slope_db_per_km=0.33, comment="joint JC-1"),
    SorEvent(48960, -0.04, 0.0, "0F9999LS", slope_db_per_km=0.33),
    SorEvent(73400, 0.0, -14.4, "1E9999LS", slope_db_per_km=0.33),
)


def sample_file(version: int = 200) -> SorFile:
    levels = -np.linspace(5.0, 9.0, 2000)
    return SorFile(version=version, cable_id="CB-01", fiber_id="1", origin="Building A", terminus="Building B",
                   cable_code="12F loose tube", operator="T. Tester", comment="invented", supplier="Example",
                   mainframe="OT-1", mainframe_serial="0001", module="M1", software="1.0",
                   timestamp=1_900_000_000, wavelength_nm=1550.0, nominal_wavelength_nm=1550,
                   pulse_width_ns=100, data_spacing=489741, group_index=1.4682, backscatter_db=-81.9,
                   averages=1000, events=EVENTS, total_loss_db=1.234, orl_db=38.5, samples_db=levels)


def test_crc_is_the_ccitt_false_variant():
    # CRC-16/CCITT-FALSE (= CRC-16/IBM-3740: poly 0x1021, init 0xFFFF, no reflection, xorout 0):
    # check value of the ASCII bytes "123456789" is 0x29B1 (the CRC RevEng catalogue of
    # parametrised CRC algorithms). The SR-4731 descriptions name the CCITT CRC-16 with start 0xFFFF.
    assert crc16_ccitt(b"123456789") == 0x29B1
    # The same catalogue: CRC-16/XMODEM (the same polynomial, init 0) checks to 0x31C3.
    assert crc16_ccitt(b"123456789", crc=0) == 0x31C3


@pytest.mark.parametrize("version", [100, 200], ids=["issue-1", "issue-2"])
def test_our_files_read_back_exactly(version):
    sor = sample_file(version)
    back = read_sor(write_sor(sor))
    expected = replace(quantised(sor), skipped_blocks=(), checksum=back.checksum)
    assert back == expected
    assert np.array_equal(back.samples_db, expected.samples_db)
    assert back.events == EVENTS


def test_layout_of_an_issue_2_file():
    data = write_sor(sample_file())
    # Issue 2 starts with the Map block: "Map\0", version 200, its size, the number of blocks.
    assert data[:4] == b"Map\0"
    version, map_size, blocks = struct.unpack("<HIH", data[4:12])
    assert (version, blocks) == (200, 7)  # Map + GenParams..DataPts + Cksum
    assert data[map_size:map_size + 10] == b"GenParams\0"
    # The last 8 bytes are the Cksum block: its name, then the CRC of every byte before it.
    assert data[-8:-2] == b"Cksum\0"
    assert struct.unpack("<H", data[-2:])[0] == crc16_ccitt(data[:-2])


def test_an_independent_reader_reads_our_file_to_the_same_values():
    sor = sample_file()
    parsed = otdrparser.parse2(io.BytesIO(write_sor(sor)))
    assert parsed["FxdParams"]["wavelength"] == 1550.0
    assert parsed["FxdParams"]["index_of_refraction"] == pytest.approx(1.4682, abs=1e-9)
    assert parsed["FxdParams"]["pulse_width"] == 100
    assert parsed["GenParams"]["cable_id"] == "CB-01"
    assert parsed["GenParams"]["location_a"] == "Building A"
    events = parsed["KeyEvents"]["events"]
    # otdrparser gives time of travel in ns (our unit is 100 ps), losses and reflectance in dB
    assert [round(e["time_of_travel"] * 10) for e in events] == [e.time_100ps for e in EVENTS]
    assert [e["splice_loss"] for e in events] == pytest.approx([e.loss_db for e in EVENTS])
    assert [e["reflection_loss"] for e in events] == pytest.approx([e.reflectance_db for e in EVENTS])
    assert [e["event_type"] for e in events] == [e.code for e in EVENTS]
    points = parsed["DataPts"]["data_points"]
    assert len(points) == 2000
    assert [p[1] for p in points[:3]] == pytest.approx(list(quantised(sor).samples_db[:3]))


def test_unknown_blocks_are_skipped_by_their_size():
    data = write_sor(sample_file())
    version, map_size, blocks = struct.unpack("<HIH", data[4:12])
    vendor = b"MakerData\0" + b"\x01\x02\x03\x04\x05"
    entry = b"MakerData\0" + struct.pack("<HI", 200, len(vendor))
    body = data[map_size:-8]
    # The Map lists Cksum last: the maker's block goes before it.
    listing = data[12:map_size]
    cksum_entry = b"Cksum\0" + struct.pack("<HI", 200, 8)
    assert listing.endswith(cksum_entry)
    new_map = (b"Map\0" + struct.pack("<HIH", 200, map_size + len(entry), blocks + 1)
               + listing[:-len(cksum_entry)] + entry + cksum_entry)
    out = new_map + body + vendor + b"Cksum\0"
    out += struct.pack("<H", crc16_ccitt(out))
    back = read_sor(out)
    assert back.skipped_blocks == ("MakerData",)
    assert back.events == EVENTS


def test_a_truncated_file_is_refused():
    data = write_sor(sample_file())
    with pytest.raises(SorError, match="truncated"):
        read_sor(data[:len(data) // 2])


def test_a_wrong_checksum_is_refused():
    data = bytearray(write_sor(sample_file()))
    data[-100] ^= 0x01  # one trace sample changed
    with pytest.raises(SorError, match="wrong checksum"):
        read_sor(bytes(data))


def test_a_wrong_block_size_in_the_map_is_refused():
    data = bytearray(write_sor(sample_file()))
    at = data.index(b"GenParams\0") + 10  # the first Map entry: version, then size
    size = struct.unpack("<I", data[at + 2:at + 6])[0]
    data[at + 2:at + 6] = struct.pack("<I", size - 3)
    with pytest.raises(SorError, match="block size in the Map .*is wrong"):
        read_sor(bytes(data))


def test_not_an_otdr_file_is_refused():
    with pytest.raises(SorError, match="SR-4731"):
        read_sor(b"link_id,strand\nL1,1\n" * 4)
