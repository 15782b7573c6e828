"""The catalogs of project.yaml: components, transceivers, instruments, technicians.

Each function checks one section with a ``projectfile.Checker`` (which collects the
problems) and returns the model objects, or None when the section cannot be used.
"""
from __future__ import annotations

from collections.abc import Mapping
from datetime import date, datetime
from typing import Any, Final

from reportgen.inputs.files import as_written
from reportgen.model import Component, Instrument, InstrumentKind, Transceiver

from reportgen.inputs.checker import Checker

MAX_COMPONENT_LOSS_DB: Final = 60.0
POWER_RANGE_DBM: Final = (-60.0, 30.0)  # sanity bounds for transceiver powers
# The receiver's lowest average receive power. IEEE 802.3 gives it as "average receive
# power, min" (informative), not as the receiver sensitivity (stated in OMA). The earlier
# key name is still accepted; giving both is refused. The model's field is
# Transceiver.rx_min_average_dbm.
RX_MIN_KEY: Final = "rx_min_average_dbm"
RX_MIN_OLD_KEY: Final = "rx_sensitivity_dbm"


def _catalog_id(check: Checker, key: Any, path: str) -> str | None:
    text = as_written(key).strip() if isinstance(key, (str, int, float)) and not isinstance(key, bool) else ""
    if not text or ";" in text:
        check.problem(path, "an id: non-empty text without ';'", key)
        return None
    return text


def _entries(check: Checker, value: Any, path: str, what: str) -> Mapping[Any, Any] | None:
    if value is None:
        return {}
    if not isinstance(value, Mapping):
        check.problem(path, f"a mapping of id to {what}", value)
        return None
    return value


def components(check: Checker, value: Any) -> dict[str, Component] | None:
    entries = _entries(check, value, "components", "{loss_db, description}")
    if entries is None:
        return None
    catalog: dict[str, Component] = {}
    complete = True
    for key, entry in entries.items():
        path = f"components.{key}"
        component_id = _catalog_id(check, key, path)
        if not isinstance(entry, Mapping):
            check.problem(path, "a mapping with loss_db and optionally description", entry)
            complete = False
            continue
        loss = check.get(entry, "loss_db", f"{path}.loss_db",
                         f"a number from 0 to {MAX_COMPONENT_LOSS_DB:g} dB", required=True)
        loss_db = None if loss is None else check.number(
            loss, f"{path}.loss_db", f"from 0 to {MAX_COMPONENT_LOSS_DB:g} dB", 0.0, MAX_COMPONENT_LOSS_DB)
        description = check.text(entry, "description", f"{path}.description")
        if component_id is None or loss_db is None:
            complete = False
            continue
        catalog[component_id] = Component(id=component_id, loss_db=loss_db, description=description)
    return catalog if complete else None


def transceivers(check: Checker, value: Any) -> dict[str, Transceiver] | None:
    entries = _entries(check, value, "transceivers", "{wavelength_nm, tx_min_dbm, ...}")
    if entries is None:
        return None
    catalog: dict[str, Transceiver] = {}
    complete = True
    low, high = POWER_RANGE_DBM
    for key, entry in entries.items():
        path = f"transceivers.{key}"
        transceiver_id = _catalog_id(check, key, path)
        if not isinstance(entry, Mapping):
            check.problem(path, "a mapping with wavelength_nm, tx_min_dbm, tx_max_dbm, "
                                f"{RX_MIN_KEY}, rx_overload_dbm", entry)
            complete = False
            continue
        wavelength = check.get(entry, "wavelength_nm", f"{path}.wavelength_nm",
                               "a wavelength in whole nm", required=True)
        wavelength_nm = None if wavelength is None else check.wavelength(wavelength, f"{path}.wavelength_nm")
        rx_min_key = RX_MIN_OLD_KEY if RX_MIN_OLD_KEY in entry and RX_MIN_KEY not in entry else RX_MIN_KEY
        if RX_MIN_OLD_KEY in entry and RX_MIN_KEY in entry:
            check.problem(f"{path}.{RX_MIN_OLD_KEY}", f"{RX_MIN_KEY} or its earlier name "
                          f"{RX_MIN_OLD_KEY}, not both", entry[RX_MIN_OLD_KEY])
            complete = False
        keys = {"tx_min_dbm": "tx_min_dbm", "tx_max_dbm": "tx_max_dbm",
                "rx_min_average_dbm": rx_min_key, "rx_overload_dbm": "rx_overload_dbm"}
        powers = {}
        for field, name in keys.items():  # model field, key as written
            raw = check.get(entry, name, f"{path}.{name}", f"a power from {low:g} to {high:g} dBm",
                            required=True)
            powers[field] = None if raw is None else check.number(
                raw, f"{path}.{name}", f"from {low:g} to {high:g} dBm", low, high)
        description = check.text(entry, "description", f"{path}.description")
        if powers["tx_min_dbm"] is not None and powers["tx_max_dbm"] is not None \
                and powers["tx_min_dbm"] > powers["tx_max_dbm"]:
            check.problem(f"{path}.tx_max_dbm",
                          f"at least tx_min_dbm ({powers['tx_min_dbm']:g} dBm)", entry["tx_max_dbm"])
            complete = False
        if powers["rx_min_average_dbm"] is not None and powers["rx_overload_dbm"] is not None \
                and powers["rx_min_average_dbm"] >= powers["rx_overload_dbm"]:
            check.problem(f"{path}.rx_overload_dbm",
                          f"more than {rx_min_key} ({powers['rx_min_average_dbm']:g} dBm)",
                          entry["rx_overload_dbm"])
            complete = False
        if transceiver_id is None or wavelength_nm is None or None in powers.values():
            complete = False
            continue
        catalog[transceiver_id] = Transceiver(id=transceiver_id, wavelength_nm=wavelength_nm,
                                              description=description, **powers)
    return catalog if complete else None


def _date(check: Checker, value: Any, path: str) -> date | None:
    if isinstance(value, datetime):
        return value.date()
    if isinstance(value, date):
        return value
    if isinstance(value, str):
        try:
            return date.fromisoformat(value.strip())
        except ValueError:
            pass
    check.problem(path, "a date YYYY-MM-DD", value)
    return None


check_date = _date  # a date value of any YAML file checked by a Checker


def instruments(check: Checker, value: Any) -> tuple[Instrument, ...] | None:
    if value is None:
        return ()
    if not isinstance(value, list):
        check.problem("instruments", "a list of instruments, each with id and kind", value)
        return None
    instruments: list[Instrument] = []
    seen: dict[str, int] = {}
    complete = True
    for position, entry in enumerate(value, start=1):
        path = f"instruments[{position}]"
        if not isinstance(entry, Mapping):
            check.problem(path, "a mapping with id, kind, model, serial, calibration_due", entry)
            complete = False
            continue
        instrument_id = check.text(entry, "id", f"{path}.id", required=True)
        if instrument_id is not None and ";" in instrument_id:
            check.problem(f"{path}.id", "an id without ';'", instrument_id)
            instrument_id = None
        if instrument_id is not None:
            if instrument_id in seen:
                check.problem(f"{path}.id", f"an id not used before (instruments[{seen[instrument_id]}] "
                                            "has it)", instrument_id)
                instrument_id = None
            else:
                seen[instrument_id] = position
                path = f"instruments.{instrument_id}"
        kind = check.choice(entry, "kind", f"{path}.kind", InstrumentKind, None)
        model = check.text(entry, "model", f"{path}.model")
        serial = check.text(entry, "serial", f"{path}.serial")
        due = entry.get("calibration_due")
        calibration_due = None if due is None else _date(check, due, f"{path}.calibration_due")
        description = check.text(entry, "description", f"{path}.description")
        if instrument_id is None or kind is None or (due is not None and calibration_due is None):
            complete = False
            continue
        instruments.append(Instrument(id=instrument_id, kind=kind, model=model, serial=serial,
                                      calibration_due=calibration_due, description=description))
    return tuple(instruments) if complete else None


def technicians(check: Checker, value: Any) -> tuple[str, ...]:
    if value is None:
        return ()
    if not isinstance(value, list) or any(
            isinstance(item, (Mapping, list, bool)) or item is None or not as_written(item).strip()
            for item in value):
        check.problem("technicians", "a list of names", value)
        return ()
    return tuple(as_written(item).strip() for item in value)
