"""Unit conversions. Pure functions, no I/O.

Every dB in reportgen is 10·log10 of a power ratio; dBm is power relative
to 1 mW. There is no 20·log10 anywhere in this package.
"""
from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Final

# Comparisons of dB values allow for binary floating point: 2.7 must not fail a 2.7 dB
# limit because 0.75·2 + … summed to 2.6999999999999997. Every limit comparison of the
# engine (results, applications, power budgets) widens the limit by this much.
TOLERANCE_DB: Final = 1e-9

M_PER_FT: Final = 0.3048  # international foot, exact by definition (1959 agreement)
M_PER_KM: Final = 1000.0


def dbm_to_mw(power_dbm: float) -> float:
    """Optical power from dBm to milliwatts: P[mW] = 10 ** (P[dBm] / 10)."""
    return 10.0 ** (power_dbm / 10.0)


def mw_to_dbm(power_mw: float) -> float:
    """Optical power from milliwatts to dBm. ``power_mw`` must be > 0."""
    if power_mw <= 0:
        raise ValueError(f"power must be positive to express in dBm, got {power_mw} mW")
    return 10.0 * math.log10(power_mw)


def ratio_to_db(power_ratio: float) -> float:
    """A power ratio (output/input, linear) in dB: 10·log10(ratio)."""
    if power_ratio <= 0:
        raise ValueError(f"a power ratio must be positive to express in dB, got {power_ratio}")
    return 10.0 * math.log10(power_ratio)


def db_to_ratio(gain_db: float) -> float:
    """A gain in dB as a linear power ratio: 10 ** (dB / 10)."""
    return 10.0 ** (gain_db / 10.0)


def sum_losses_db(losses_db: Iterable[float]) -> float:
    """Total loss of parts in series: losses in dB add along a link."""
    return math.fsum(losses_db)


def received_power_dbm(launch_dbm: float, loss_db: float) -> float:
    """Power after a loss: P_out[dBm] = P_in[dBm] − loss[dB]."""
    return launch_dbm - loss_db


# Speed of light in vacuum [m/s]: exact by the definition of the metre (SI Brochure, 9th
# edition, 2019, BIPM: c = 299 792 458 m/s).
SPEED_OF_LIGHT_M_PER_S: Final = 299_792_458.0


def distance_from_time(round_trip_s: float, group_index: float) -> float:
    """Distance along a fiber [m] of an OTDR echo arriving ``round_trip_s`` after the pulse
    left: d = c·t/(2·n_g) (the light goes there and back at c/n_g)."""
    return SPEED_OF_LIGHT_M_PER_S * round_trip_s / (2.0 * group_index)


def ft_to_m(length_ft: float) -> float:
    """Length from feet to metres."""
    return length_ft * M_PER_FT


def m_to_ft(length_m: float) -> float:
    """Length from metres to feet."""
    return length_m / M_PER_FT


def m_to_km(length_m: float) -> float:
    """Length from metres to kilometres."""
    return length_m / M_PER_KM


# ------------------------------------------------------------ rounding of what we write
# One policy for every output (report, results.csv, summary.json):
# - dB and dBm values (losses, limits, margins, powers) to 0.01 dB, the resolution of the
#   meters' results: in the report and in results.csv as text with exactly two decimals
#   (``1.30``), in summary.json as numbers rounded to the same two decimals;
# - lengths in metres in results.csv and summary.json to 0.01 m, as numbers (the report
#   prints lengths in the project's unit, m or ft, whole or with one decimal).
# Rounding is correct rounding of the binary value (Python's format), and a value that
# rounds to zero is written without a minus sign.
DB_DECIMALS: Final = 2
LENGTH_DECIMALS: Final = 2


def format_db(value: float) -> str:
    """A dB or dBm value as text with exactly two decimals: ``1.30``, ``-0.50``, never ``-0.00``."""
    if not math.isfinite(value):
        raise ValueError(f"a dB value to write must be a finite number, got {value}")
    text = f"{value:.{DB_DECIMALS}f}"
    return text[1:] if text.startswith("-") and float(text) == 0 else text


def round_db(value: float | None) -> float | None:
    """The number :func:`format_db` writes, for summary.json; None for None or NaN."""
    if value is None or math.isnan(value):
        return None
    return float(format_db(value))


def round_length_m(value: float | None) -> float | None:
    """A length in metres rounded to 0.01 m, for results.csv and summary.json; NaN stays NaN."""
    if value is None:
        return None
    if math.isnan(value):
        return value
    return float(f"{value:.{LENGTH_DECIMALS}f}") + 0.0
