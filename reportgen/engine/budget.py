"""Loss budget: the insertion loss a link may have at each wavelength. Pure functions.

The budget adds every loss element the measurement includes [1]_::

    limit(λ) = α(F, λ)·L + (n_conn + E)·a_conn + n_splice·a_splice + Σ a_part

References
----------
.. [1] reportgen project folder format v1, "How a result is judged"
   (docs/project-format.md).
.. [2] IEC 61280-4-1 (multimode) and IEC 61280-4-2 (single-mode): which end
   connections each reference method leaves inside the measured loss.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from enum import StrEnum
from typing import Final

import pandas as pd

from reportgen.model import Component, LimitSet, Link, Plant, ReferenceMethod

END_CONNECTIONS: Final[Mapping[ReferenceMethod, int]] = {
    # [2]: end connections the reference method leaves inside the measurement
    ReferenceMethod.ONE_CORD: 2,
    ReferenceMethod.TWO_CORD: 1,
    ReferenceMethod.THREE_CORD: 0,
}


def left_out_end_connections(method: ReferenceMethod) -> int:
    """End connections the reference method leaves out of the measured loss [2]_."""
    return 2 - END_CONNECTIONS[method]


def end_allowance_db(method: ReferenceMethod, limits: LimitSet) -> float:
    """What a channel check against a maximum adds to a measured loss. [dB]

    The limit set's connection allowance for each end connection the reference method
    left out [2]_ (one-cord 0, two-cord one, three-cord two): a channel in service has both
    end connections, so a loss measured without them is raised by their allowance before it
    is compared with an application's maximum channel loss or a receiver's minimum power.
    Checks against a minimum (PON class minimum, receiver overload) use the loss as measured.
    """
    return left_out_end_connections(method) * limits.connection_db


class TermKind(StrEnum):
    FIBER = "fiber"
    CONNECTIONS = "connections"
    END_CONNECTIONS = "end-connections"
    SPLICES = "splices"
    COMPONENT = "component"


@dataclass(frozen=True)
class BudgetTerm:
    """One line of a loss budget: quantity × allowance = loss."""

    kind: TermKind
    quantity: float  # km for fiber, a count otherwise
    allowance_db: float  # dB/km for fiber, dB each otherwise
    loss_db: float
    source: str  # citation of the allowance
    item_id: str | None = None  # component id for COMPONENT terms


@dataclass(frozen=True)
class Budget:
    """The allowed loss of one link at one wavelength, term by term. [dB]"""

    link_id: str
    wavelength_nm: int
    terms: tuple[BudgetTerm, ...]
    total_db: float  # the limit a measured loss is compared with (budget_frame's limit_db)


# Sources of allowances that come from the project rather than the limit set.
COMPONENT_SOURCE: Final = "project.yaml components"
_TABLE_KEYS: Final = ("attenuation_db_per_km", "attenuation_db_per_km_outside")


BUDGET_COLUMNS: Final = [
    "link_id", "wavelength_nm", "length_km", "alpha_db_per_km", "fiber_db", "fiber_source",
    "end_connections", "end_connections_db", "connections", "connections_db", "connection_db",
    "connection_source", "splices", "splices_db", "splice_db", "splice_source",
    "component_ids", "component_losses_db", "components_db", "limit_db",
]


def budget_frame(
    links: Sequence[Link],
    limits: LimitSet,
    method: ReferenceMethod,
    components: Mapping[str, Component],
) -> pd.DataFrame:
    """Every link's loss budget at every wavelength the limit set defines for it, term by term.

    The one budget computation: the judge compares results with ``limit_db``, and a link's
    term-by-term :class:`Budget` (report, diagrams) is read from its rows
    (:class:`BudgetTable`). One row per link and wavelength, sorted by both.

    Parameters
    ----------
    links : sequence of Link
        Fiber type F, plant, length L [km], connection and splice counts, parts.
    limits : LimitSet
        α [dB/km] per fiber type and wavelength, a_conn and a_splice [dB], each with its citation.
    method : ReferenceMethod
        Decides E, the end connections left in the measurement [2]_.
    components : Mapping[str, Component]
        The project's catalog of passive parts (loss_db each).

    Returns
    -------
    pandas.DataFrame
        ``link_id``, ``wavelength_nm``; the fiber term ``length_km``, ``alpha_db_per_km``,
        ``fiber_db``, ``fiber_source``; ``end_connections``, ``connections``, their
        ``end_connections_db`` and ``connections_db``, ``connection_db`` (a_conn),
        ``connection_source``; ``splices``, ``splices_db``, ``splice_db``, ``splice_source``;
        ``component_ids`` and ``component_losses_db`` (tuples, link order),
        ``components_db``; ``limit_db``, the limit [1]_ (the total of every term).
    """
    end_connections = END_CONNECTIONS[method]
    outside = limits.attenuation_db_per_km_outside
    parts = [tuple(components[part_id].loss_db for part_id in link.components) for link in links]
    frame = pd.DataFrame({
        "link_id": [link.link_id for link in links],
        "fiber_type": [link.fiber_type.value for link in links],
        "table": [_TABLE_KEYS[link.plant is Plant.OUTSIDE and link.fiber_type in outside]
                  for link in links],
        "length_km": pd.Series([link.length_km for link in links], dtype="float64"),
        "connections": pd.Series([link.connections for link in links], dtype="int64"),
        "splices": pd.Series([link.splices for link in links], dtype="int64"),
        "component_ids": pd.Series([link.components for link in links], dtype=object),
        "component_losses_db": pd.Series(parts, dtype=object),
        "at": pd.Series(range(len(links)), dtype="int64"),
    })
    frame = frame.merge(_attenuation_frame(limits), on=["fiber_type", "table"], how="inner")
    frame["fiber_db"] = frame["alpha_db_per_km"] * frame["length_km"]  # [1] fiber term
    frame["end_connections"] = end_connections  # [2]
    frame["end_connections_db"] = float(end_connections * limits.connection_db)
    frame["connections_db"] = frame["connections"] * limits.connection_db  # [1]
    frame["connection_db"] = limits.connection_db
    frame["connection_source"] = limits.source_for("connection_db")
    frame["splices_db"] = frame["splices"] * limits.splice_db  # [1] splice term
    frame["splice_db"] = limits.splice_db
    frame["splice_source"] = limits.source_for("splice_db")
    # [1] as the contract writes it: the connections and the end connections together,
    # the parts' losses summed first
    frame["components_db"] = [sum(parts[at]) for at in frame["at"].tolist()]
    limit_db = (frame["fiber_db"]
                + (frame["connections"] + end_connections) * limits.connection_db
                + frame["splices_db"] + frame["components_db"])
    frame["limit_db"] = limit_db
    return frame[BUDGET_COLUMNS].sort_values(["link_id", "wavelength_nm"], ignore_index=True)


def _attenuation_frame(limits: LimitSet) -> pd.DataFrame:
    rows: list[tuple[str, str, int, float, str]] = []
    for key, table in zip(_TABLE_KEYS, (limits.attenuation_db_per_km,
                                        limits.attenuation_db_per_km_outside)):
        rows += [(fiber.value, key, wl, alpha, limits.source_for(f"{key}.{fiber.value}"))
                 for fiber, row in table.items() for wl, alpha in row.items()]
    return pd.DataFrame(rows, columns=["fiber_type", "table", "wavelength_nm", "alpha_db_per_km",
                                       "fiber_source"])


class BudgetTable:
    """The term-by-term :class:`Budget` of each row of a :func:`budget_frame`, by link."""

    def __init__(self, frame: pd.DataFrame) -> None:
        self._columns = {column: frame[column].tolist() for column in BUDGET_COLUMNS}
        self._rows: dict[str, list[int]] = {}
        for at, link_id in enumerate(self._columns["link_id"]):
            self._rows.setdefault(link_id, []).append(at)  # wavelength order: frame sorted

    def for_link(self, link_id: str) -> tuple[Budget, ...]:
        """Budgets of a link at every wavelength the limit set defines for it, shortest first."""
        return tuple(self._budget(at) for at in self._rows.get(link_id, ()))

    def get(self, link_id: str, wavelength_nm: int) -> Budget | None:
        """The budget of a link at one wavelength; None where the limit set has none."""
        wavelengths = self._columns["wavelength_nm"]
        for at in self._rows.get(link_id, ()):
            if wavelengths[at] == wavelength_nm:
                return self._budget(at)
        return None

    def _budget(self, at: int) -> Budget:
        c = {column: values[at] for column, values in self._columns.items()}
        terms = [
            BudgetTerm(TermKind.FIBER, c["length_km"], c["alpha_db_per_km"], c["fiber_db"],
                       c["fiber_source"]),
            BudgetTerm(TermKind.END_CONNECTIONS, c["end_connections"], c["connection_db"],
                       c["end_connections_db"], c["connection_source"]),
        ]
        if c["connections"]:
            terms.append(BudgetTerm(TermKind.CONNECTIONS, c["connections"], c["connection_db"],
                                    c["connections_db"], c["connection_source"]))
        if c["splices"]:
            terms.append(BudgetTerm(TermKind.SPLICES, c["splices"], c["splice_db"],
                                    c["splices_db"], c["splice_source"]))
        terms += [BudgetTerm(TermKind.COMPONENT, 1, loss_db, loss_db, COMPONENT_SOURCE, part_id)
                  for part_id, loss_db in zip(c["component_ids"], c["component_losses_db"])]
        return Budget(c["link_id"], int(c["wavelength_nm"]), tuple(terms), c["limit_db"])


def link_budget(
    link: Link,
    wavelength_nm: int,
    limits: LimitSet,
    method: ReferenceMethod,
    components: Mapping[str, Component],
) -> Budget:
    """Allowed insertion loss of one link at one wavelength, broken down. [dB]

    :func:`budget_frame` of the one link, read as a :class:`Budget`. Raises KeyError
    when the limit set has no attenuation for the link's fiber type at ``wavelength_nm``.
    """
    budget = BudgetTable(budget_frame([link], limits, method, components)).get(
        link.link_id, wavelength_nm)
    if budget is None:
        raise KeyError(wavelength_nm)
    return budget


def allowed_loss_db(
    link: Link,
    wavelength_nm: int,
    limits: LimitSet,
    method: ReferenceMethod,
    components: Mapping[str, Component] | None = None,
) -> float:
    """The limit a measured loss of ``link`` at ``wavelength_nm`` is compared with. [dB]"""
    return link_budget(link, wavelength_nm, limits, method, components or {}).total_db
