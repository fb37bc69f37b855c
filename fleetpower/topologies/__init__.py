"""Supply topologies: one module each, behind one protocol (:class:`.base.Topology`), and
the registry the design schema is derived from (topology names, parts and output models).

To add a topology: write its module (parts model, engine row, stresses, ...), give it a
code and rows in :mod:`fleetpower.engine` if it needs new equations, and add its line to
:data:`REGISTRY`. A topology the engine does not solve (:mod:`.measured`) sets
``simulated = False`` and gives each case's figures itself (``direct_state``).
"""

from __future__ import annotations

from .base import Topology
from .capacitive_dropper import TOPOLOGY as _capacitive_dropper
from .mains_transformer import TOPOLOGY as _mains_transformer
from .measured import TOPOLOGY as _measured
from .rectifier_smps import TOPOLOGY as _rectifier_smps
from .resistive_dropper import TOPOLOGY as _resistive_dropper

#: topology name (the design file's ``topology``) -> its implementation, in menu order
REGISTRY: dict[str, Topology] = {
    t.name: t
    for t in (_capacitive_dropper, _resistive_dropper, _rectifier_smps, _mains_transformer,
              _measured)
}
TOPOLOGIES = tuple(REGISTRY)


def topology(name: str) -> Topology:
    """The topology called ``name`` (a validated design's ``topology``)."""
    return REGISTRY[name]


__all__ = ["REGISTRY", "TOPOLOGIES", "Topology", "topology"]
