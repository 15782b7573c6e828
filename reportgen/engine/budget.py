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

from collections.abc import Iterable, Mapping, Sequence
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

    @property
    def total_db(self) -> float:
        return sum(term.loss_db for term in self.terms)


def link_budget(
    link: Link,
    wavelength_nm: int,
    limits: LimitSet,
    method: ReferenceMethod,
    components: Mapping[str, Component],
) -> Budget:
    """Allowed insertion loss of one link at one wavelength, broken down. [dB]

    Parameters
    ----------
    link : Link
        Fiber type F, plant, length L [km], connection and splice counts, parts.
    wavelength_nm : int
        Test wavelength λ. [nm]
    limits : LimitSet
        α [dB/km], a_conn and a_splice [dB], each with its citation.
    method : ReferenceMethod
        Decides E, the end connections left in the measurement [2]_.
    components : Mapping[str, Component]
        The project's catalog of passive parts (loss_db each).

    Returns
    -------
    Budget
        Terms in link order; ``total_db`` is the limit a measured loss is compared with.
    """
    alpha_db_per_km = limits.attenuation_for(link.fiber_type, wavelength_nm, link.plant)
    table = ("attenuation_db_per_km_outside"
             if link.plant is Plant.OUTSIDE
             and link.fiber_type in limits.attenuation_db_per_km_outside
             else "attenuation_db_per_km")
    connection_source = limits.source_for("connection_db")
    end_connections = END_CONNECTIONS[method]
    terms = [
        BudgetTerm(TermKind.FIBER, link.length_km, alpha_db_per_km,
                   alpha_db_per_km * link.length_km,  # [1] fiber term
                   limits.source_for(f"{table}.{link.fiber_type.value}")),
        BudgetTerm(TermKind.END_CONNECTIONS, end_connections, limits.connection_db,
                   end_connections * limits.connection_db, connection_source),  # [1], [2]
    ]
    if link.connections:
        terms.append(BudgetTerm(TermKind.CONNECTIONS, link.connections, limits.connection_db,
                                link.connections * limits.connection_db, connection_source))
    if link.splices:
        terms.append(BudgetTerm(TermKind.SPLICES, link.splices, limits.splice_db,
                                link.splices * limits.splice_db,  # [1] splice term
                                limits.source_for("splice_db")))
    for part_id in link.components:  # [1] catalog parts
        part = components[part_id]
        terms.append(BudgetTerm(TermKind.COMPONENT, 1, part.loss_db, part.loss_db,
                                "project.yaml components", part_id))
    return Budget(link.link_id, wavelength_nm, tuple(terms))


def allowed_loss_db(
    link: Link,
    wavelength_nm: int,
    limits: LimitSet,
    method: ReferenceMethod,
    components: Mapping[str, Component] | None = None,
) -> float:
    """The limit a measured loss of ``link`` at ``wavelength_nm`` is compared with. [dB]"""
    return link_budget(link, wavelength_nm, limits, method, components or {}).total_db


def links_frame(links: Sequence[Link], components: Mapping[str, Component]) -> pd.DataFrame:
    """Links as a frame of the quantities the budget needs (one row per link)."""
    return pd.DataFrame({
        "link_id": [link.link_id for link in links],
        "fiber_type": [link.fiber_type.value for link in links],
        "plant": [link.plant.value for link in links],
        "length_km": [link.length_km for link in links],
        "connections": [link.connections for link in links],
        "splices": [link.splices for link in links],
        "components_db": [sum(components[c].loss_db for c in link.components) for link in links],
    })


def _attenuation_frame(limits: LimitSet) -> pd.DataFrame:
    rows: list[tuple[str, str, int, float]] = []
    for plant, table in (("inside", limits.attenuation_db_per_km),
                         ("outside", limits.attenuation_db_per_km_outside)):
        rows += [(fiber.value, plant, wl, alpha) for fiber, row in table.items()
                 for wl, alpha in row.items()]
    return pd.DataFrame(rows, columns=["fiber_type", "table", "wavelength_nm", "alpha_db_per_km"])


def budget_frame(
    links: Sequence[Link],
    limits: LimitSet,
    method: ReferenceMethod,
    components: Mapping[str, Component],
) -> pd.DataFrame:
    """Allowed loss of every link at every wavelength the limit set defines for it.

    Vectorised form of :func:`link_budget`. Columns: link_id, wavelength_nm,
    alpha_db_per_km, fiber_db, connections_db, splices_db, components_db, limit_db.
    """
    frame = links_frame(links, components)
    outside_types = {fiber.value for fiber in limits.attenuation_db_per_km_outside}
    frame["table"] = "inside"
    frame.loc[(frame["plant"] == "outside") & frame["fiber_type"].isin(outside_types),
              "table"] = "outside"
    frame = frame.merge(_attenuation_frame(limits), on=["fiber_type", "table"], how="inner")
    frame["fiber_db"] = frame["alpha_db_per_km"] * frame["length_km"]  # [1] fiber term
    frame["connections_db"] = (  # [1], [2] connections between the ends plus E
        (frame["connections"] + END_CONNECTIONS[method]) * limits.connection_db)
    frame["splices_db"] = frame["splices"] * limits.splice_db  # [1] splice term
    frame["limit_db"] = (frame["fiber_db"] + frame["connections_db"] + frame["splices_db"]
                         + frame["components_db"])
    columns = ["link_id", "wavelength_nm", "alpha_db_per_km", "fiber_db", "connections_db",
               "splices_db", "components_db", "limit_db"]
    return frame[columns].sort_values(["link_id", "wavelength_nm"], ignore_index=True)


def budgets_for_link(
    link: Link,
    wavelengths_nm: Iterable[int],
    limits: LimitSet,
    method: ReferenceMethod,
    components: Mapping[str, Component],
) -> list[Budget]:
    """Term-by-term budgets of one link at several wavelengths (for the report)."""
    return [link_budget(link, wl, limits, method, components) for wl in wavelengths_nm]
