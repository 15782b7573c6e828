"""OTDR trace files in the trade's standard record format (Telcordia SR-4731, issues 1 and 2).

Written from the format's public description (the block list of SR-4731 issue 2 and the
open descriptions of its byte layout); no other program's code is used.

Layout (all integers little-endian; strings are Latin-1 ending in a zero byte):

* **Map** (first). Issue 2: ``"Map\\0"``, version ``uint16`` (200 = 2.00), size of the Map
  block ``uint32``, number of blocks ``uint16`` (the Map included), then for every other block
  its name (string), version ``uint16`` and size ``uint32``. Issue 1 (version 100) is the same
  without the leading name. The blocks follow in the Map's order; a block's size counts all its
  bytes (its name too, in issue 2). Blocks this module does not know (a maker's own blocks) are
  skipped by their size.
* Every issue-2 block starts with its name (``"GenParams\\0"`` ...); issue-1 blocks do not.
* **GenParams**: language (2 chars), cable id, fiber id, [issue 2: fiber type ``uint16``, e.g.
  652 for ITU-T G.652], nominal wavelength ``uint16`` [nm], originating location, terminating
  location, cable code, current-data flag (2 chars), user offset ``int32``, [issue 2: user offset
  distance ``int32``], operator, comment.
* **SupParams**: supplier, mainframe id, mainframe serial, module id, module serial, software,
  other (7 strings).
* **FxdParams**: date/time ``uint32`` (Unix seconds), distance units (2 chars, ``mt``), actual
  wavelength ``uint16`` [0.1 nm], acquisition offset ``int32``, [2: its distance ``int32``],
  number of pulse widths ``uint16`` (1 here), pulse width ``uint16`` [ns], data spacing
  ``uint32`` [100 ps per 10,000 points], number of points ``uint32``, group index ``uint32``
  [×100,000], backscatter coefficient ``uint16`` [−0.1 dB], number of averages ``uint32``,
  [2: averaging time ``uint16`` [0.1 s]], acquisition range ``uint32``, [2: its distance
  ``int32``], front panel offset ``int32``, noise floor level ``uint16``, noise floor scale
  ``int16``, power offset first point ``uint16``, loss threshold ``uint16`` [0.001 dB],
  reflectance threshold ``uint16`` [−0.001 dB], end-of-fiber threshold ``uint16`` [0.001 dB],
  [2: trace type (2 chars, ``ST``), four window coordinates ``int32``].
* **KeyEvents**: number of events ``uint16``; per event: number ``uint16``, propagation time
  ``uint32`` [100 ps, one way], attenuation coefficient of the fiber before it ``int16``
  [0.001 dB/km], loss ``int16`` [0.001 dB], reflectance ``int32`` [0.001 dB], event code
  (8 chars: reflective ``1``/non-reflective ``0``/saturated ``2``; ``F`` found, ``A`` added,
  ``E`` end of fiber ...; landmark ``9999``; loss method ``LS``/``2P``), [2: five marker
  positions ``int32``], comment; then end-to-end loss ``int32`` [0.001 dB], loss start and
  end ``int32`` [100 ps], optical return loss ``uint16`` [0.001 dB], ORL start and end ``int32``.
* **DataPts**: number of points ``uint32``, number of traces ``uint16`` (1), number of points
  ``uint32``, scale factor ``uint16`` (1000 = 1), then the points ``uint16`` each
  [0.001 dB below the top of the scale, times scale/1000].
* **Cksum** (last): ``uint16``, the CRC-16 of every byte of the file before it. The variant is
  the CCITT one the format's descriptions name: polynomial 0x1021, initial value 0xFFFF, no
  reflection, no final XOR (catalogued as CRC-16/CCITT-FALSE, also CRC-16/IBM-3740; its check
  value for the ASCII bytes ``123456789`` is 0x29B1).

Times in the file are one-way: the instrument has halved the round trip, so a position is
``c·t/n`` of the file's time ``t`` (``reportgen.engine.otdr.distance_from_time`` takes the round
trip, ``2·t``).
"""
from __future__ import annotations

import binascii
import struct
from dataclasses import dataclass, field, replace
from typing import Final

import numpy as np

__all__ = ["SorError", "SorEvent", "SorFile", "crc16_ccitt", "read_sor", "write_sor"]

VERSION_1: Final = 100
VERSION_2: Final = 200
KNOWN_BLOCKS: Final = ("GenParams", "SupParams", "FxdParams", "KeyEvents", "DataPts", "Cksum")
REQUIRED_BLOCKS: Final = ("GenParams", "FxdParams", "KeyEvents", "DataPts")
TIME_UNIT_S: Final = 100e-12  # 100 ps: the unit of event times and data spacing
POINTS_PER_SPACING: Final = 10_000  # data spacing is the time of 10,000 points


class SorError(ValueError):
    """A file that is not a readable SR-4731 record; the text says what is wrong and where."""


@dataclass(frozen=True)
class SorEvent:
    """One row of KeyEvents, in the file's units converted to plain ones."""

    time_100ps: int  # one-way propagation time from the front panel [100 ps]
    loss_db: float
    reflectance_db: float  # 0.0 when the instrument gives none (non-reflective)
    code: str = "0F9999LS"  # 8 characters, see the module docstring
    slope_db_per_km: float = 0.0
    comment: str = ""
    markers: tuple[int, int, int, int, int] = (0, 0, 0, 0, 0)  # issue 2 only [100 ps]

    @property
    def reflective(self) -> bool:
        return self.code[:1] in ("1", "2")

    @property
    def end_of_fiber(self) -> bool:
        return self.code[1:2] == "E"


@dataclass(frozen=True)
class SorFile:
    """The content of one SR-4731 file (one trace, one pulse width)."""

    version: int = VERSION_2  # 100 (issue 1) or 200 (issue 2)
    # GenParams
    language: str = "EN"
    cable_id: str = ""
    fiber_id: str = ""
    fiber_type: int = 652
    nominal_wavelength_nm: int = 1310
    origin: str = ""
    terminus: str = ""
    cable_code: str = ""
    data_flag: str = "BC"
    user_offset: int = 0
    user_offset_distance: int = 0
    operator: str = ""
    comment: str = ""
    # SupParams
    supplier: str = ""
    mainframe: str = ""
    mainframe_serial: str = ""
    module: str = ""
    module_serial: str = ""
    software: str = ""
    other: str = ""
    # FxdParams
    timestamp: int = 0  # Unix seconds, UTC
    units: str = "mt"
    wavelength_nm: float = 1310.0  # actual wavelength, 0.1 nm steps
    acquisition_offset: int = 0
    acquisition_offset_distance: int = 0
    pulse_width_ns: int = 100
    data_spacing: int = 0  # time of 10,000 points [100 ps], one way
    group_index: float = 1.4680
    backscatter_db: float = -80.0  # backscatter coefficient, 0.1 dB steps
    averages: int = 0
    averaging_time_s: float = 0.0
    acquisition_range: int = 0
    acquisition_range_distance: int = 0
    front_panel_offset: int = 0
    noise_floor_level: int = 0
    noise_floor_scale: int = 1
    power_offset: int = 0
    loss_threshold_db: float = 0.05
    reflectance_threshold_db: float = -65.0
    end_threshold_db: float = 3.0
    trace_type: str = "ST"
    window: tuple[int, int, int, int] = (0, 0, 0, 0)
    # KeyEvents
    events: tuple[SorEvent, ...] = ()
    total_loss_db: float = 0.0
    loss_start: int = 0
    loss_end: int = 0
    orl_db: float = 0.0
    orl_start: int = 0
    orl_end: int = 0
    # DataPts: levels in dB (0 at the top of the scale, going negative), 0.001 dB steps
    samples_db: np.ndarray = field(default_factory=lambda: np.zeros(0), compare=False, repr=False)
    scale_factor: int = 1000
    skipped_blocks: tuple[str, ...] = ()  # blocks read past by their size (read only)
    checksum: int | None = None  # as stored (read only)

    @property
    def sample_spacing_s(self) -> float:
        """One-way time between two points [s]."""
        return self.data_spacing * TIME_UNIT_S / POINTS_PER_SPACING


# ------------------------------------------------------------------ CRC


def crc16_ccitt(data: bytes, crc: int = 0xFFFF) -> int:
    """CRC-16, polynomial 0x1021, initial 0xFFFF, not reflected, no final XOR.

    ``binascii.crc_hqx`` is this CRC (the CCITT polynomial, MSB first) with the initial value
    given, computed in C.
    """
    return binascii.crc_hqx(data, crc)


# ------------------------------------------------------------------ reading


class _Reader:
    """Reads one block's bytes; running past its end is a wrong-size block."""

    def __init__(self, data: bytes, block: str, start: int) -> None:
        self.data = data
        self.pos = 0
        self.block = block
        self.start = start

    def _take(self, size: int) -> bytes:
        if self.pos + size > len(self.data):
            raise self.too_short()
        chunk = self.data[self.pos:self.pos + size]
        self.pos += size
        return chunk

    def too_short(self) -> SorError:
        return SorError(f"block {self.block} (at byte {self.start}) ends before its content does: "
                        f"the block size in the Map ({len(self.data)} bytes) is wrong")

    def unpack(self, fmt: str) -> tuple:
        return struct.unpack("<" + fmt, self._take(struct.calcsize("<" + fmt)))

    def one(self, fmt: str) -> int:
        return self.unpack(fmt)[0]

    def fixed(self, size: int) -> str:
        return self._take(size).decode("latin-1").rstrip("\0 ")

    def string(self) -> str:
        end = self.data.find(b"\0", self.pos)
        if end < 0:
            raise self.too_short()
        text = self.data[self.pos:end].decode("latin-1")
        self.pos = end + 1
        return text.strip()


def read_sor(data: bytes) -> SorFile:
    """Decode an SR-4731 file (issue 1 or 2); raises ``SorError`` saying what is wrong.

    The caller adds the file's name to the message.
    """
    if len(data) < 8:
        raise SorError(f"a file of {len(data)} bytes is too short for an OTDR record")
    version, map_size, blocks, pos = _read_map(data)
    values: dict[str, object] = {"version": version}
    skipped: list[str] = []
    seen: set[str] = set()
    for name, size in blocks:
        if pos + size > len(data):
            raise SorError(f"the file is truncated: block {name} needs bytes {pos} to {pos + size} "
                           f"but the file has {len(data)} bytes")
        body = _Reader(data[pos:pos + size], name, pos)
        if version >= VERSION_2:
            written = body.string()
            if written != name:
                raise SorError(f"the Map lists block {name} at byte {pos} but the block there is "
                               f"named {written!r} (a block size in the Map is wrong)")
        if name == "Cksum":
            stored = body.one("H")
            computed = crc16_ccitt(data[:pos + body.pos - 2])
            if stored != computed:
                raise SorError(f"wrong checksum: the file says 0x{stored:04X}, its bytes give "
                               f"0x{computed:04X} (the file is damaged or was changed)")
            values["checksum"] = stored
        elif name == "GenParams":
            values.update(_gen_params(body, version))
        elif name == "SupParams":
            keys = ("supplier", "mainframe", "mainframe_serial", "module", "module_serial",
                    "software", "other")
            values.update((key, body.string()) for key in keys)
        elif name == "FxdParams":
            values.update(_fxd_params(body, version))
        elif name == "KeyEvents":
            values.update(_key_events(body, version))
        elif name == "DataPts":
            values.update(_data_points(body))
        else:
            skipped.append(name)
        seen.add(name)
        pos += size
    missing = [name for name in REQUIRED_BLOCKS if name not in seen]
    if missing:
        raise SorError("no " + ", ".join(missing) + " block (an OTDR record needs "
                       + ", ".join(REQUIRED_BLOCKS) + ")")
    values.pop("_points", None)
    values["skipped_blocks"] = tuple(skipped)
    return SorFile(**values)  # type: ignore[arg-type]


def _read_map(data: bytes) -> tuple[int, int, list[tuple[str, int]], int]:
    if data.startswith(b"Map\0"):
        head = 4
    else:
        head = 0
    reader = _Reader(data[:len(data)], "Map", 0)
    reader.pos = head
    version, map_size, count = reader.unpack("HIH")
    if head and version < VERSION_2 or not head and version >= VERSION_2 or version < VERSION_1 \
            or version >= 300:
        raise SorError(f"not an OTDR record of SR-4731 issue 1 or 2 (Map version {version / 100:.2f})")
    if map_size > len(data):
        raise SorError(f"the file is truncated: the Map block says {map_size} bytes, "
                       f"the file has {len(data)}")
    if count < 2:
        raise SorError(f"the Map lists {count} blocks; an OTDR record has at least 5")
    reader = _Reader(data[:map_size], "Map", 0)
    reader.pos = head + 8
    blocks = []
    for _ in range(count - 1):
        name = reader.string()
        _block_version, size = reader.unpack("HI")
        if size < (len(name) + 1 if head else 0):
            raise SorError(f"the Map gives block {name} a size of {size} bytes")
        blocks.append((name, size))
    if reader.pos != map_size:
        raise SorError(f"the Map block's size is {map_size} bytes but its list ends at byte "
                       f"{reader.pos}")
    return version, map_size, blocks, map_size


def _gen_params(body: _Reader, version: int) -> dict[str, object]:
    out: dict[str, object] = {"language": body.fixed(2), "cable_id": body.string(),
                              "fiber_id": body.string()}
    if version >= VERSION_2:
        out["fiber_type"] = body.one("H")
    out["nominal_wavelength_nm"] = body.one("H")
    out.update(origin=body.string(), terminus=body.string(), cable_code=body.string(),
               data_flag=body.fixed(2), user_offset=body.one("i"))
    if version >= VERSION_2:
        out["user_offset_distance"] = body.one("i")
    out.update(operator=body.string(), comment=body.string())
    return out


def _fxd_params(body: _Reader, version: int) -> dict[str, object]:
    out: dict[str, object] = {}
    out["timestamp"], = body.unpack("I")
    out["units"] = body.fixed(2)
    out["wavelength_nm"] = body.one("H") / 10
    out["acquisition_offset"] = body.one("i")
    if version >= VERSION_2:
        out["acquisition_offset_distance"] = body.one("i")
    widths = body.one("H")
    if widths != 1:
        raise SorError(f"FxdParams lists {widths} pulse widths; one trace of one pulse width "
                       "is read")
    out["pulse_width_ns"], out["data_spacing"], points, index = body.unpack("HIII")
    out["_points"] = points
    if index <= 0 or out["data_spacing"] <= 0:
        raise SorError("FxdParams gives a group index or data spacing of 0")
    out["group_index"] = index / 100_000
    out["backscatter_db"] = -body.one("H") / 10
    out["averages"] = body.one("I")
    if version >= VERSION_2:
        out["averaging_time_s"] = body.one("H") / 10
    out["acquisition_range"] = body.one("I")
    if version >= VERSION_2:
        out["acquisition_range_distance"] = body.one("i")
    (out["front_panel_offset"], out["noise_floor_level"], out["noise_floor_scale"],
     out["power_offset"], loss_thr, refl_thr, end_thr) = body.unpack("iHhHHHH")
    out["loss_threshold_db"] = loss_thr / 1000
    out["reflectance_threshold_db"] = -refl_thr / 1000
    out["end_threshold_db"] = end_thr / 1000
    if version >= VERSION_2:
        out["trace_type"] = body.fixed(2)
        out["window"] = body.unpack("iiii")
    return out


def _key_events(body: _Reader, version: int) -> dict[str, object]:
    count = body.one("H")
    events = []
    for _ in range(count):
        _number, time, slope, loss, reflectance = body.unpack("HIhhi")
        code = body.fixed(8)
        markers = body.unpack("iiiii") if version >= VERSION_2 else (0, 0, 0, 0, 0)
        comment = body.string()
        events.append(SorEvent(time_100ps=time, loss_db=loss / 1000, reflectance_db=reflectance / 1000,
                               code=code, slope_db_per_km=slope / 1000, comment=comment,
                               markers=markers))
    total, loss_start, loss_end, orl, orl_start, orl_end = body.unpack("iiiHii")
    return {"events": tuple(events), "total_loss_db": total / 1000, "loss_start": loss_start,
            "loss_end": loss_end, "orl_db": orl / 1000, "orl_start": orl_start, "orl_end": orl_end}


def _data_points(body: _Reader) -> dict[str, object]:
    points, traces, points_again, scale = body.unpack("IHIH")
    if traces != 1:
        raise SorError(f"DataPts holds {traces} traces; one is read")
    if points != points_again:
        raise SorError(f"DataPts gives two different numbers of points ({points} and {points_again})")
    need = 2 * points
    if body.pos + need > len(body.data):
        raise body.too_short()
    raw = np.frombuffer(body.data, dtype="<u2", count=points, offset=body.pos)
    body.pos += need
    levels = raw.astype(np.float64) * (-(scale or 1000) / 1_000_000)
    return {"samples_db": levels, "scale_factor": scale}


# ------------------------------------------------------------------ writing


def _s(text: str) -> bytes:
    return text.encode("latin-1", "replace") + b"\0"


def _f(text: str, size: int) -> bytes:
    return text.encode("latin-1", "replace")[:size].ljust(size, b" ")


def write_sor(sor: SorFile) -> bytes:
    """The SR-4731 bytes of ``sor`` (issue 1 or 2 by ``sor.version``), checksum included."""
    v2 = sor.version >= VERSION_2
    blocks = [("GenParams", _gen_bytes(sor, v2)), ("SupParams", b"".join(_s(t) for t in (
        sor.supplier, sor.mainframe, sor.mainframe_serial, sor.module, sor.module_serial,
        sor.software, sor.other))), ("FxdParams", _fxd_bytes(sor, v2)),
        ("KeyEvents", _events_bytes(sor, v2)), ("DataPts", _points_bytes(sor))]
    if v2:
        blocks = [(name, _s(name) + body) for name, body in blocks]
    cksum_size = (6 if v2 else 0) + 2
    entries = [(name, len(body)) for name, body in blocks] + [("Cksum", cksum_size)]
    listing = b"".join(_s(name) + struct.pack("<HI", sor.version, size) for name, size in entries)
    head = b"Map\0" if v2 else b""
    map_size = len(head) + 8 + len(listing)
    out = head + struct.pack("<HIH", sor.version, map_size, len(entries) + 1) + listing
    out += b"".join(body for _name, body in blocks)
    if v2:
        out += _s("Cksum")
    return out + struct.pack("<H", crc16_ccitt(out))


def _gen_bytes(sor: SorFile, v2: bool) -> bytes:
    out = _f(sor.language, 2) + _s(sor.cable_id) + _s(sor.fiber_id)
    if v2:
        out += struct.pack("<H", sor.fiber_type)
    out += struct.pack("<H", sor.nominal_wavelength_nm)
    out += _s(sor.origin) + _s(sor.terminus) + _s(sor.cable_code) + _f(sor.data_flag, 2)
    out += struct.pack("<i", sor.user_offset)
    if v2:
        out += struct.pack("<i", sor.user_offset_distance)
    return out + _s(sor.operator) + _s(sor.comment)


def _fxd_bytes(sor: SorFile, v2: bool) -> bytes:
    out = struct.pack("<I", sor.timestamp) + _f(sor.units, 2)
    out += struct.pack("<Hi", round(sor.wavelength_nm * 10), sor.acquisition_offset)
    if v2:
        out += struct.pack("<i", sor.acquisition_offset_distance)
    out += struct.pack("<HHIIIHI", 1, sor.pulse_width_ns, sor.data_spacing, len(sor.samples_db),
                       round(sor.group_index * 100_000), round(-sor.backscatter_db * 10), sor.averages)
    if v2:
        out += struct.pack("<H", round(sor.averaging_time_s * 10))
    out += struct.pack("<I", sor.acquisition_range)
    if v2:
        out += struct.pack("<i", sor.acquisition_range_distance)
    out += struct.pack("<iHhHHHH", sor.front_panel_offset, sor.noise_floor_level, sor.noise_floor_scale,
                       sor.power_offset, round(sor.loss_threshold_db * 1000),
                       round(-sor.reflectance_threshold_db * 1000), round(sor.end_threshold_db * 1000))
    if v2:
        out += _f(sor.trace_type, 2) + struct.pack("<iiii", *sor.window)
    return out


def _events_bytes(sor: SorFile, v2: bool) -> bytes:
    out = struct.pack("<H", len(sor.events))
    for number, event in enumerate(sor.events, start=1):
        out += struct.pack("<HIhhi", number, event.time_100ps, round(event.slope_db_per_km * 1000),
                           round(event.loss_db * 1000), round(event.reflectance_db * 1000))
        out += _f(event.code, 8)
        if v2:
            out += struct.pack("<iiiii", *event.markers)
        out += _s(event.comment)
    return out + struct.pack("<iiiHii", round(sor.total_loss_db * 1000), sor.loss_start, sor.loss_end,
                             round(sor.orl_db * 1000), sor.orl_start, sor.orl_end)


def _points_bytes(sor: SorFile) -> bytes:
    levels = np.asarray(sor.samples_db, dtype=np.float64)
    raw = np.clip(np.rint(-levels * 1_000_000 / sor.scale_factor), 0, 65535).astype("<u2")
    return struct.pack("<IHIH", len(raw), 1, len(raw), sor.scale_factor) + raw.tobytes()


def quantised(sor: SorFile) -> SorFile:
    """``sor`` with its samples rounded as the file stores them (what reading back gives)."""
    raw = np.clip(np.rint(-np.asarray(sor.samples_db) * 1_000_000 / sor.scale_factor), 0, 65535)
    return replace(sor, samples_db=raw * (-sor.scale_factor / 1_000_000))
