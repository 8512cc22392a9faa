"""Drain zones: parts of the section held at atmospheric pressure that take water out, never put it in.

A zone with ``"drain": true`` (toe drain, horizontal blanket drain, chimney drain) makes every node of its
elements an outflow-only point: h = y (pressure head 0) where water leaves the soil into the drain, no
flow where the drain would feed water back.  The solver iterates this like a seepage face.  The flow the
drain takes is the sum of the nodal reactions over its nodes (m3/s per m; a node shared with a boundary
or another drain is split evenly, as for boundaries).
"""

from __future__ import annotations

import numpy as np

from .errors import SectionError

__all__ = ["drain_zones", "drain_zone_nodes"]


def drain_zones(section) -> list[int]:
    """Indices of the zones marked ``"drain": true``."""
    return [i for i, z in enumerate(section.spec.zones) if getattr(z, "drain", False)]


def drain_zone_nodes(section, mesh) -> dict[str, np.ndarray]:
    """{drain zone name: sorted nodes of its elements}.

    Raises SectionError if a drain zone shares its name with a boundary (their flows would be ambiguous).
    """
    out = {}
    bnames = set(section.boundary_names)
    for zi in drain_zones(section):
        name = section.spec.zones[zi].name
        if name in bnames:
            raise SectionError(f"{section.source}: zone '{name}': a drain zone needs a name no boundary uses "
                               "(its flow is reported under that name)")
        out[name] = np.unique(mesh.cells[mesh.zone == zi])
    return out
