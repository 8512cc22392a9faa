"""Every example in sections/ is a tested example: it loads, meshes, solves and balances."""

from pathlib import Path

import pytest

import seepfe

SECTIONS = sorted(p for p in (Path(__file__).parent.parent / "sections").glob("*.json")
                  if not p.name.endswith((".sweep.json", ".build.json", ".stages.json", ".reach.json",
                                          ".observations.json")))


@pytest.mark.parametrize("path", SECTIONS, ids=[p.stem for p in SECTIONS])
def test_example_section_solves_and_balances(path):
    section = seepfe.load_section(path)
    # coarse P1 keeps the suite fast; the examples' own mesh settings are exercised by the CLI test
    result = seepfe.solve(section, order=1, size=section.extent / 40)
    assert result.solver_info["converged"]
    if getattr(result, "is_transient", False):
        _check_transient(section, result)
        return
    # inflow equals outflow: consistent nodal reactions (mass balance, exact up to solver tolerance)
    assert result.balance["relative_error"] < 1e-6
    assert result.balance["inflow_m3_s_per_m"] > 0
    heads = [b.head for b in section.spec.boundaries if b.head is not None]
    # maximum principle (Laplace-type equation, common practice): heads lie within the boundary heads
    lo = min(heads + [float(result.mesh.points[:, 1].min())])
    assert result.h.max() <= max(heads) + 1e-9 and result.h.min() >= lo - 1e-9


def _check_transient(section, result):
    """A section with a hydrograph: the water balance (storage change + boundary flows) closes at every step, and
    at every stored time the heads lie within the boundary heads of the whole run (maximum principle of the
    diffusion equation, common practice)."""
    assert result.balance["largest_step_error"] < 1e-6
    assert result.balance["run_error"] < 1e-6
    assert len(result.times) >= 2 and result.least_fs["fs"] is not None
    hyd = [b for b in section.spec.boundaries if b.hydrograph is not None]
    heads = [p[1] for b in hyd for p in b.hydrograph] + [b.head for b in section.spec.boundaries if b.head is not None]
    y = result.mesh.points[:, 1]
    for t in result.times:
        r = result.at(t)
        assert r.balance["relative_error"] < 1e-6
        assert r.h.max() <= max(heads) + 1e-6 and r.h.min() >= min(heads + [float(y.min())]) - 1e-6
