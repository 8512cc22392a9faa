"""Sweeps, target searches and river-stage fragility of a section (``seepfe sweep``).

>>> from seepfe.sweep import run_sweep                                             # doctest: +SKIP
>>> rep = run_sweep("sections/levee_blanket.json", "sections/levee_blanket.sweep.json",
...                 out="runs/blanket")                                            # doctest: +SKIP

Modules: :mod:`.spec` (the sweep file), :mod:`.values` (applying values to a section dict),
:mod:`.case` (one solve reduced to a small record), :mod:`.cache` (finished cases on disk),
:mod:`.runner` (serial, process pool or Dask), :mod:`.target` (search), :mod:`.fragility`
(lognormal conductivities), :mod:`.report` (CSV and plots), :mod:`.api` (``run_sweep``).
"""

from .api import SweepReport, run_sweep
from .case import case_hash, run_case
from .runner import Runner
from .spec import SweepSpec, load_sweep
from .values import with_values

__all__ = ["run_sweep", "SweepReport", "Runner", "run_case", "case_hash", "load_sweep", "SweepSpec",
           "with_values"]
