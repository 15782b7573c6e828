"""Transceiver power budget: the received power window of a link. Pure functions.

For a link fitted with a transceiver (project.yaml ``transceivers``), the power
reaching the receiver lies in a window [1]_::

    rx_min = tx_min − (worst loss + end allowance)     rx_max = tx_max − least loss

    low margin  = rx_min − rx_min_average   (≥ 0: strong enough)
    high margin = rx_overload − rx_max      (≥ 0: not too strong)

``rx_min_average`` is the receiver's lowest average receive power (IEEE 802.3 clause 52
"average receive power, min", informative [2]_), not its sensitivity in OMA.

The end allowance is the limit set's connection allowance for each end connection the
reference method leaves out of the measured loss (two-cord: one, three-cord: two [3]_;
:func:`reportgen.engine.budget.end_allowance_db`). It is added on the weak side only, so
both sides stay conservative: the weakest case takes the loss the channel will have with
both end connections, the strongest case the loss as measured.

The losses are the judged results of the link at the tested wavelength nearest the
transceiver's wavelength (basis ``measured``), or, when the link has no judged result
at all, its loss budget (the limit it is judged against) at the budget wavelength
nearest the transceiver's (basis ``budget``: then worst = least = the limit).

Verdicts: ``ok``; ``too-weak`` when rx_min is below the receive minimum; ``too-strong``
when rx_max is above the overload level and an attenuator from the list brings it to
or below the overload level while keeping rx_min at or above the receive minimum (the
smallest such one is named); ``no-fit`` when too strong and no attenuator in the list
does both (including the case of a window wider than the receiver's).

References
----------
.. [1] Received power = launched power − link loss; a receiver needs power between
   its receive minimum and its overload level (common practice; reference-values §7).
.. [2] IEEE 802.3 clause 52, average launch and receive powers of 10GBASE-SR/LR/ER
   (informative acceptance values; verified, secondary).
.. [3] IEC 61280-4-1 / IEC 61280-4-2: end connections inside the measured loss per
   reference method.
"""
from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from enum import StrEnum
from typing import Any

import pandas as pd

from reportgen.model import Link, Transceiver
from reportgen.units import TOLERANCE_DB, received_power_dbm, round_db


class PowerVerdict(StrEnum):
    OK = "ok"
    TOO_WEAK = "too-weak"
    TOO_STRONG = "too-strong"
    NO_FIT = "no-fit"


class PowerBasis(StrEnum):
    MEASURED = "measured"  # judged results of the link
    BUDGET = "budget"  # no judged result: the link's loss budget (its limit)


@dataclass(frozen=True)
class LossRange:
    """Worst (highest) and least judged loss of one link at one wavelength. [dB]"""

    worst_loss_db: float
    least_loss_db: float
    results: int  # judged results over strands and directions


@dataclass(frozen=True)
class PowerBudget:
    """The received power window of one link with its transceiver."""

    link_id: str
    transceiver: str  # transceiver id
    transceiver_wavelength_nm: int
    basis: PowerBasis
    wavelength_nm: int  # tested (or budget) wavelength whose losses were used
    worst_loss_db: float
    least_loss_db: float
    tx_min_dbm: float
    tx_max_dbm: float
    rx_min_average_dbm: float
    rx_overload_dbm: float
    rx_min_dbm: float
    rx_max_dbm: float
    low_margin_db: float  # rx_min − receive minimum
    high_margin_db: float  # overload − rx_max
    attenuator_db: float | None  # smallest fitting attenuator when too strong
    verdict: PowerVerdict
    end_allowance_db: float = 0.0  # added to the worst loss for left-out end connections

    @property
    def window_db(self) -> float:
        """Loss the optic tolerates: lowest launch power − receive minimum. [dB]"""
        return self.tx_min_dbm - self.rx_min_average_dbm

    @property
    def fitted_rx_min_dbm(self) -> float | None:
        """Weakest received power with the recommended attenuator fitted. [dBm]"""
        return None if self.attenuator_db is None else self.rx_min_dbm - self.attenuator_db

    @property
    def fitted_rx_max_dbm(self) -> float | None:
        """Strongest received power with the recommended attenuator fitted. [dBm]"""
        return None if self.attenuator_db is None else self.rx_max_dbm - self.attenuator_db

    def to_json(self) -> dict[str, Any]:
        """The ``power`` object of a link in summary.json."""
        return {
            "transceiver": self.transceiver,
            "basis": self.basis.value,
            "wavelength_nm": self.wavelength_nm,
            "rx_min_dbm": round_db(self.rx_min_dbm),
            "rx_max_dbm": round_db(self.rx_max_dbm),
            "low_margin_db": round_db(self.low_margin_db),
            "high_margin_db": round_db(self.high_margin_db),
            "attenuator_db": round_db(self.attenuator_db),
            "verdict": self.verdict.value,
            "end_allowance_db": round_db(self.end_allowance_db),
        }


def judged_loss_table(results: pd.DataFrame) -> pd.DataFrame:
    """Worst and least judged loss per link and wavelength, as a frame.

    One groupby over the counted rows (``counted`` true: judged, or valid and latest at a
    wavelength without a cabling limit) of ``Judgement.results``; ``judged`` where a frame
    has no ``counted`` column.

    Returns
    -------
    pandas.DataFrame
        Columns ``link_id``, ``wavelength_nm``, ``worst_loss_db`` (max), ``least_loss_db``
        (min) and ``results`` (count), one row per link and wavelength, sorted by both.
    """
    use = results["counted"] if "counted" in results.columns else results["judged"]
    judged = results.loc[use.astype(bool), ["link_id", "wavelength_nm", "loss_db"]]
    stats = judged.groupby(["link_id", "wavelength_nm"], sort=True)["loss_db"].agg(
        ["max", "min", "size"])
    return stats.rename(columns={"max": "worst_loss_db", "min": "least_loss_db",
                                 "size": "results"}).reset_index()


def loss_ranges_from_table(table: pd.DataFrame) -> dict[str, dict[int, LossRange]]:
    """``{link_id: {wavelength_nm: LossRange}}`` from :func:`judged_loss_table`."""
    ranges: dict[str, dict[int, LossRange]] = {}
    # Plain lists: iterating a MultiIndex or a Series row by row is far slower.
    for link_id, wavelength_nm, worst, least, size in zip(
            table["link_id"].tolist(), table["wavelength_nm"].tolist(),
            table["worst_loss_db"].tolist(), table["least_loss_db"].tolist(),
            table["results"].tolist()):
        ranges.setdefault(str(link_id), {})[int(wavelength_nm)] = LossRange(
            float(worst), float(least), int(size))
    return ranges


def judged_loss_ranges(results: pd.DataFrame) -> dict[str, dict[int, LossRange]]:
    """Worst and least judged loss per link and wavelength, over strands and directions.

    One groupby over the judged rows (``judged`` true) of ``Judgement.results``.

    Returns
    -------
    dict
        ``{link_id: {wavelength_nm: LossRange}}``; links without judged results are absent.
    """
    return loss_ranges_from_table(judged_loss_table(results))


def budget_limits_db(budgets: pd.DataFrame) -> dict[str, dict[int, float]]:
    """``{link_id: {wavelength_nm: limit_db}}`` from ``Judgement.budgets``."""
    limits: dict[str, dict[int, float]] = {}
    for link_id, wavelength_nm, limit_db in zip(budgets["link_id"].tolist(),
                                                budgets["wavelength_nm"].tolist(),
                                                budgets["limit_db"].tolist()):
        limits.setdefault(str(link_id), {})[int(wavelength_nm)] = float(limit_db)
    return limits


def nearest_wavelength_nm(available_nm: Iterable[int], target_nm: int) -> int:
    """The available wavelength nearest ``target_nm``; a tie goes to the shorter one."""
    return min(available_nm, key=lambda wl: (abs(wl - target_nm), wl))


def choose_attenuator_db(
    rx_min_dbm: float,
    rx_max_dbm: float,
    rx_min_average_dbm: float,
    rx_overload_dbm: float,
    attenuators_db: Iterable[float],
) -> float | None:
    """Smallest attenuator that brings the window inside the receiver's. [dB]

    An attenuator of A dB fits when ``rx_max − A ≤ overload`` and
    ``rx_min − A ≥ receive minimum`` (exactly at either level fits). None if none fits.
    """
    for attenuator_db in sorted(attenuators_db):
        if (rx_max_dbm - attenuator_db <= rx_overload_dbm + TOLERANCE_DB
                and rx_min_dbm - attenuator_db >= rx_min_average_dbm - TOLERANCE_DB):
            return float(attenuator_db)
    return None


def power_window(
    transceiver: Transceiver,
    worst_loss_db: float,
    least_loss_db: float,
    attenuators_db: Iterable[float],
    end_allowance_db: float = 0.0,
) -> tuple[float, float, float, float, float | None, PowerVerdict]:
    """Received power window, margins, attenuator and verdict for known losses.

    Parameters
    ----------
    transceiver : Transceiver
        Launch power range tx_min..tx_max [dBm], lowest average receive power and overload [dBm].
    worst_loss_db, least_loss_db : float
        Highest and lowest loss between the transceivers. [dB]
    attenuators_db : iterable of float
        Attenuators on offer. [dB]
    end_allowance_db : float
        Allowance of the end connections the reference method left out, added to the
        worst loss only (the weak side). [dB]

    Returns
    -------
    tuple
        rx_min_dbm, rx_max_dbm, low_margin_db, high_margin_db, attenuator_db, verdict.

    References
    ----------
    .. [1] Received power = launched power − loss (common practice).
    """
    rx_min_dbm = received_power_dbm(transceiver.tx_min_dbm,
                                    worst_loss_db + end_allowance_db)   # [1], [3]
    rx_max_dbm = received_power_dbm(transceiver.tx_max_dbm, least_loss_db)   # [1]
    low_margin_db = rx_min_dbm - transceiver.rx_min_average_dbm
    high_margin_db = transceiver.rx_overload_dbm - rx_max_dbm
    attenuator_db = None
    if high_margin_db < -TOLERANCE_DB:
        attenuator_db = choose_attenuator_db(rx_min_dbm, rx_max_dbm, transceiver.rx_min_average_dbm,
                                             transceiver.rx_overload_dbm, attenuators_db)
        verdict = PowerVerdict.TOO_STRONG if attenuator_db is not None else PowerVerdict.NO_FIT
    elif low_margin_db < -TOLERANCE_DB:
        verdict = PowerVerdict.TOO_WEAK
    else:
        verdict = PowerVerdict.OK
    return rx_min_dbm, rx_max_dbm, low_margin_db, high_margin_db, attenuator_db, verdict


def assess_power(
    link: Link,
    transceiver: Transceiver | None,
    loss_ranges: Mapping[str, Mapping[int, LossRange]],
    budget_limits: Mapping[str, Mapping[int, float]],
    attenuators_db: Iterable[float],
    end_allowance_db: float = 0.0,
) -> PowerBudget | None:
    """Power budget of one link with its transceiver; None without a transceiver.

    Parameters
    ----------
    link : Link
        The link (only its id is used).
    transceiver : Transceiver or None
        The link's transceiver from project.yaml, None when the link names none.
    loss_ranges : mapping
        :func:`judged_loss_ranges` of the project's judged results.
    budget_limits : mapping
        :func:`budget_limits_db` of the project's budgets (used when the link has no
        judged result).
    attenuators_db : iterable of float
        ``testing.attenuators_db``. [dB]
    end_allowance_db : float
        :func:`reportgen.engine.budget.end_allowance_db` of the project. [dB]

    Returns
    -------
    PowerBudget or None
        None also when the link has neither a judged result nor a budget.
    """
    if transceiver is None:
        return None
    measured = loss_ranges.get(link.link_id) or {}
    if measured:
        basis = PowerBasis.MEASURED
        wavelength_nm = nearest_wavelength_nm(measured, transceiver.wavelength_nm)
        worst_db, least_db = measured[wavelength_nm].worst_loss_db, measured[wavelength_nm].least_loss_db
    else:
        planned = budget_limits.get(link.link_id) or {}
        if not planned:
            return None
        basis = PowerBasis.BUDGET
        wavelength_nm = nearest_wavelength_nm(planned, transceiver.wavelength_nm)
        worst_db = least_db = planned[wavelength_nm]
    rx_min, rx_max, low, high, attenuator, verdict = power_window(
        transceiver, worst_db, least_db, attenuators_db, end_allowance_db)
    return PowerBudget(
        link_id=link.link_id, transceiver=transceiver.id,
        transceiver_wavelength_nm=transceiver.wavelength_nm, basis=basis,
        wavelength_nm=wavelength_nm, worst_loss_db=worst_db, least_loss_db=least_db,
        tx_min_dbm=transceiver.tx_min_dbm, tx_max_dbm=transceiver.tx_max_dbm,
        rx_min_average_dbm=transceiver.rx_min_average_dbm,
        rx_overload_dbm=transceiver.rx_overload_dbm,
        rx_min_dbm=rx_min, rx_max_dbm=rx_max, low_margin_db=low, high_margin_db=high,
        attenuator_db=attenuator, verdict=verdict, end_allowance_db=end_allowance_db,
    )
