"""One error root for seepfe, with a few subclasses.

The library never prints or exits; the CLI maps these to one-line messages and exit codes.
"""

__all__ = ["SeepfeError", "SectionError", "MeshError", "SolverError"]


class SeepfeError(Exception):
    """Root of every error seepfe raises on purpose."""


class SectionError(SeepfeError, ValueError):
    """The section file or dict is not valid. The message is one line naming the item and the fault."""


class MeshError(SeepfeError):
    """gmsh could not mesh the section (the message says which zone or why)."""


class SolverError(SeepfeError):
    """The linear or nonlinear solve failed (singular system, no convergence)."""
