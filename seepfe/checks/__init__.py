"""Underseepage safety checks: exit gradients, heave and uplift, hand methods beside the FE.

>>> checks = result.exit_gradients("landside")          # doctest: +SKIP
>>> checks.x, checks.gradient, checks.blanket_gradient, checks.fs   # doctest: +SKIP

See docs/checks.md for the equations and their sources. Results support, and never replace, the
judgement of a licensed engineer; local codes and agency criteria govern.
"""

from .exit import ExitChecks, default_boundaries, exit_gradients
from .strata import critical_gradient, saturated_unit_weight

__all__ = ["ExitChecks", "exit_gradients", "default_boundaries", "critical_gradient",
           "saturated_unit_weight"]
