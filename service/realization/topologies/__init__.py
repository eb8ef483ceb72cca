"""Op-amp stage topologies: design equations, circuits and sensitivities.

Public surface
--------------
``TOPOLOGIES``
    Registry ``{name: Topology}`` that the catalog lists and the dispatcher uses.
``get_topology(name)``
    Registry lookup raising :class:`~service.realization.errors.UnknownTopology`.
``auto_topology(section, *, opamp_gbw_hz=None)``
    The documented default choice ``(topology, strategy)`` for a section.
``Topology``, ``PartSpec``
    The interface (see :mod:`service.realization.topologies.base`).
"""

from __future__ import annotations

from service.realization.errors import UnknownTopology
from service.realization.topologies.base import PartSpec, Topology
from service.realization.topologies.sallen_key import SALLEN_KEY

TOPOLOGIES: dict[str, Topology] = {t.name: t for t in (SALLEN_KEY,)}


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


__all__ = ["TOPOLOGIES", "Topology", "PartSpec", "get_topology"]
