"""seepfe: steady seepage through and under levee and dam sections by finite elements.

>>> import seepfe
>>> section = seepfe.load_section("sections/levee_blanket.json")   # doctest: +SKIP
>>> result = seepfe.solve(section)                                  # doctest: +SKIP
>>> result.boundary_flow("river")                                   # doctest: +SKIP

Results support, and never replace, the judgement of a licensed engineer; local codes and agency
criteria govern.
"""

from .about import CAUTION, __version__
from .errors import MeshError, SectionError, SeepfeError, SolverError
from .mesh import Mesh, make_mesh
from .result import Result
from .analysis import Analysis, analyse
from .section import Section, load_section
from .solver import solve

__all__ = ["__version__", "load_section", "solve", "analyse", "make_mesh", "Section", "Mesh", "Result", "Analysis",
           "SeepfeError", "SectionError", "MeshError", "SolverError", "CAUTION"]
