"""seepfe: steady seepage through and under levee and dam sections by finite elements.

>>> import seepfe
>>> section = seepfe.load_section("sections/levee_blanket.json")   # doctest: +SKIP
>>> result = seepfe.solve(section)                                  # doctest: +SKIP
>>> result.boundary_flow("river")                                   # doctest: +SKIP

Results support, and never replace, the judgement of a licensed engineer; local codes and agency
criteria govern.

The public names are imported on first use (module ``__getattr__``), so ``import seepfe``, the CLI's
``--help`` and its one-line errors do not pay for numpy, scipy, shapely and gmsh until they are needed.
"""

import importlib

from .about import CAUTION, __version__
from .errors import MeshError, SectionError, SeepfeError, SolverError

#: public name -> module that defines it
_LAZY = {"load_section": "section", "Section": "section", "solve": "solver", "make_mesh": "mesh",
         "Mesh": "mesh", "Result": "result", "analyse": "analysis", "Analysis": "analysis",
         "calibrate": "calibration"}

__all__ = ["__version__", "load_section", "solve", "analyse", "calibrate", "make_mesh", "Section", "Mesh", "Result",
           "Analysis",
           "SeepfeError", "SectionError", "MeshError", "SolverError", "CAUTION"]


def __getattr__(name):
    mod = _LAZY.get(name)
    if mod is None:
        raise AttributeError(f"module 'seepfe' has no attribute '{name}'")
    value = getattr(importlib.import_module(f".{mod}", __name__), name)
    globals()[name] = value          # later look-ups skip this function
    return value


def __dir__():
    return sorted(set(globals()) | set(_LAZY))
