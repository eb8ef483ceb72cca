"""Op-amp stage topologies: design equations, circuits and sensitivities.

Public surface
--------------
``TOPOLOGIES``
    Registry ``{name: Topology}`` that the catalog lists and the dispatcher uses.
``get_topology(name)``
    Registry lookup raising :class:`~service.realization.errors.UnknownTopology`.
``auto_topology(section, *, opamp_gbw_hz=None, opamp_model=None, gbw_error=0.01)``
    The documented default choice ``(topology, strategy)`` for a section.
``describe_auto()``
    The rule and limits of that choice, for the catalog.
``Topology``, ``PartSpec``
    The interface (see :mod:`service.realization.topologies.base`).
"""

from __future__ import annotations

from service.realization.errors import UnknownTopology
from service.realization.topologies.base import PartSpec, Topology
from service.realization.topologies.auto import auto_topology, describe_auto
from service.realization.topologies.delyiannis_friend import DELYIANNIS_FRIEND_NOTCH
from service.realization.topologies.first_order import INVERTING_FIRST_ORDER, NONINVERTING_FIRST_ORDER, RC_FIRST_ORDER
from service.realization.topologies.multiple_feedback import MULTIPLE_FEEDBACK
from service.realization.topologies.sallen_key import SALLEN_KEY
from service.realization.topologies.state_variable import STATE_VARIABLE
from service.realization.topologies.tow_thomas import TOW_THOMAS
from service.realization.topologies.twin_t import TWIN_T_NOTCH

TOPOLOGIES: dict[str, Topology] = {
    t.name: t
    for t in (
        RC_FIRST_ORDER,
        INVERTING_FIRST_ORDER,
        NONINVERTING_FIRST_ORDER,
        SALLEN_KEY,
        MULTIPLE_FEEDBACK,
        STATE_VARIABLE,
        TOW_THOMAS,
        TWIN_T_NOTCH,
        DELYIANNIS_FRIEND_NOTCH,
    )
}


def get_topology(name: str) -> Topology:
    """The registered topology called ``name``.

    Raises
    ------
    UnknownTopology
        When ``name`` is not registered; the message lists the known names.
    """
    try:
        return TOPOLOGIES[name]
    except (KeyError, TypeError):
        raise UnknownTopology(
            f"unknown topology {name!r}; known topologies are {', '.join(sorted(TOPOLOGIES))}", field="topology"
        ) from None


def describe_all() -> list[dict]:
    """Catalog entries of every registered topology (see :meth:`Topology.describe`)."""
    return [t.describe() for t in TOPOLOGIES.values()]


__all__ = ["TOPOLOGIES", "Topology", "PartSpec", "get_topology", "auto_topology", "describe_all", "describe_auto"]
