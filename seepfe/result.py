"""The result of a solve: heads, pressures, gradients, velocities and boundary flows.

Units: heads m, pressure head m, pore pressure kPa, gradients m/m, velocities m/s (Darcy flux),
flows m3/s per m of section (positive into the section).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
import shapely

from . import fem
from .about import CAUTION
from .drains import drain_zone_nodes
from .mesh import Mesh
from .section import Section

__all__ = ["Result", "CAUTION"]


@dataclass(eq=False)
class Result:
    """Steady head field on a mesh of a section, and field queries on it (heads, gradients, flows).

    A plain container of the solution: the checks, verdicts and hand methods are computed from it by
    :func:`seepfe.analyse`.

    Attributes
    ----------
    section, mesh : the inputs.
    h : (N,) total head at the nodes, m.
    reactions : (N,) consistent nodal inflow at the nodes, m3/s per m (non-zero on prescribed nodes).
    solver_info : dict of solver figures (method, unknowns, passes, times).
    """

    section: Section
    mesh: Mesh
    h: np.ndarray
    reactions: np.ndarray
    load: np.ndarray
    fixed: np.ndarray
    element_K: np.ndarray = field(repr=False)
    solver_info: dict = field(default_factory=dict)
    matrix: object = field(default=None, repr=False)
    face_nodes: np.ndarray = field(default=None, repr=False)
    face_active: np.ndarray = field(default=None, repr=False)
    kr: np.ndarray = field(default=None, repr=False)     # (E,) relative conductivity (unconfined solve)
    #: the factorisation of A[free][:, free] (free: the nodes not in ``fixed``) with ``solve(b)``, kept by
    #: ``solve(..., keep_factorization=True)`` after a confined solve; None otherwise
    factorization: object = field(default=None, repr=False)

    # ----------------------------------------------------------------- nodal fields
    @property
    def total_head(self) -> np.ndarray:
        """(N,) total head, m."""
        return self.h

    @property
    def pressure_head(self) -> np.ndarray:
        """(N,) pressure head h - y, m."""
        return self.h - self.mesh.points[:, 1]

    @property
    def pore_pressure(self) -> np.ndarray:
        """(N,) pore-water pressure gamma_w (h - y), kPa."""
        return self.section.gamma_w * self.pressure_head

    # ----------------------------------------------------------------- element fields
    @cached_property
    def _jac(self):
        return fem.jacobians(self.mesh.points, self.mesh.cells)

    def gradient_at(self, xi) -> np.ndarray:
        """Head gradient (dh/dx, dh/dy) at reference point(s) xi of every element: (E, n, 2), m/m."""
        xi = np.atleast_2d(np.asarray(xi, float))
        G = fem.gradients(self.mesh.order, self._jac[0], xi)        # (E, n, nloc, 2)
        return np.einsum("eqla,el->eqa", G, self.h[self.mesh.cells])

    @cached_property
    def element_gradient(self) -> np.ndarray:
        """(E, 2) head gradient (dh/dx, dh/dy) at each element's centroid, m/m."""
        return self.gradient_at([[1 / 3, 1 / 3]])[:, 0]

    @cached_property
    def velocity(self) -> np.ndarray:
        """(E, 2) Darcy velocity -K grad h at each element's centroid, m/s."""
        return -np.einsum("eab,eb->ea", self.element_K, self.element_gradient)

    # ----------------------------------------------------------------- flows
    @cached_property
    def _flows(self) -> dict:
        sec, m = self.section, self.mesh
        kinds = [b.kind for b in sec.spec.boundaries]
        reacting = [i for i, k in enumerate(kinds) if k != "flux"]
        count = np.zeros(m.n_nodes)
        nodesets = {}
        for i in range(len(kinds)):
            nodesets[i] = m.boundary_nodes(i)
            if i in reacting:
                count[nodesets[i]] += 1
        drain_sets = drain_zone_nodes(sec, m)
        for nd in drain_sets.values():
            count[nd] += 1
        out = {}
        for i, b in enumerate(sec.spec.boundaries):
            nd = nodesets[i]
            if b.kind == "flux":
                on = m.edge_boundary == i
                L = np.linalg.norm(m.points[m.edges[on, 1]] - m.points[m.edges[on, 0]], axis=1)
                out[b.name] = float(b.flux * L.sum())
            else:
                out[b.name] = float(np.sum(self.reactions[nd] / count[nd])) if len(nd) else 0.0
        for name, nd in drain_sets.items():       # drain zones (issue 4): negative = water taken out
            out[name] = float(np.sum(self.reactions[nd] / count[nd]))
        return out

    def boundary_flow(self, name: str) -> float:
        """Flow across a named boundary or drain zone, m3/s per m of section, positive into the section."""
        if name not in self._flows:
            raise KeyError(self.section.boundary(name))  # raises with a 'did you mean'
        return self._flows[name]

    @property
    def flows(self) -> dict:
        """{boundary name: flow in m3/s per m, positive into the section}."""
        return dict(self._flows)

    @cached_property
    def balance(self) -> dict:
        """Global balance of the boundary flows (m3/s per m) and its relative error."""
        f = np.array(list(self._flows.values()) or [0.0])
        inflow, outflow = float(f[f > 0].sum()), float(-f[f < 0].sum())
        net = float(f.sum())
        return {"inflow_m3_s_per_m": inflow, "outflow_m3_s_per_m": outflow, "net_m3_s_per_m": net,
                "relative_error": abs(net) / max(inflow, outflow, 1e-300)}

    # ----------------------------------------------------------------- phreatic surface (issue 4)
    def phreatic_lines(self) -> list:
        """Every pressure head = 0 polyline, (n, 2) arrays of x, y in m, longest first."""
        from . import phreatic
        return phreatic.phreatic_lines(self.mesh, self.pressure_head)

    def phreatic_line(self) -> np.ndarray:
        """The phreatic line (pressure head = 0), an (n, 2) array of x, y in m ordered upstream to
        downstream; empty (0, 2) when the whole section is saturated."""
        lines = self.phreatic_lines()
        return lines[0] if lines else np.zeros((0, 2))

    def seepage_faces(self) -> dict:
        """{seepage-face boundary: {"exit_point_m", "length_m", "outflow_m3_s_per_m"}}."""
        from . import phreatic
        return phreatic.seepage_faces(self)

    def drain_flows(self) -> dict:
        """{drain boundary or drain zone: water it takes out, m3/s per m (>= 0)}."""
        from . import phreatic
        return phreatic.drain_flows(self)

    # ----------------------------------------------------------------- interpolation
    def locate(self, points):
        """Element index and reference coordinates (xi, eta) of points; element -1 outside the section."""
        P = np.atleast_2d(np.asarray(points, float))
        e, xi = np.full(len(P), -1, dtype=np.int64), np.zeros((len(P), 2))
        inside = np.flatnonzero(shapely.contains_xy(self._outline, P[:, 0], P[:, 1])
                                | shapely.intersects_xy(self._outline.boundary, P[:, 0], P[:, 1]))
        tree, inv = self._locator, self._jac[0]
        cells, pts, ne = self.mesh.cells, self.mesh.points, self.mesh.n_elements
        todo = inside
        # the element holding a point is nearly always among the few whose centroids are nearest
        for k in (8, 64, ne):
            if not len(todo):
                break
            for s in range(0, len(todo), max(1, 2_000_000 // min(k, ne))):
                part = todo[s:s + max(1, 2_000_000 // min(k, ne))]
                if k < ne:
                    cand = tree.query(P[part], k=min(k, ne))[1].reshape(len(part), -1)
                else:
                    cand = np.broadcast_to(np.arange(ne), (len(part), ne))
                loc = np.einsum("mkab,mkb->mka", inv[cand], P[part, None, :] - pts[cells[cand, 0]])
                ok = np.minimum(loc.min(axis=2), 1.0 - loc.sum(axis=2)) >= -1e-9
                has = ok.any(axis=1)
                first = ok.argmax(axis=1)
                rows = np.flatnonzero(has)
                e[part[rows]] = cand[rows, first[rows]]
                xi[part[rows]] = loc[rows, first[rows]]
            todo = todo[e[todo] < 0]
        return e, xi

    @cached_property
    def _locator(self):
        from scipy.spatial import cKDTree
        return cKDTree(self.mesh.points[self.mesh.triangles].mean(axis=1))

    @cached_property
    def _outline(self):
        """The meshed outline (a polygon slightly grown by the geometric tolerance), prepared."""
        poly = self.section.outline.buffer(self.section.length_tol)
        shapely.prepare(poly)
        return poly

    def interpolate(self, values: np.ndarray, points) -> np.ndarray:
        """Interpolate nodal values at points (n, 2) with the element shape functions; nan outside."""
        e, xi = self.locate(points)
        N = fem.shape(self.mesh.order, xi)
        ee = np.where(e >= 0, e, 0)
        out = np.einsum("nl,nl->n", N, values[self.mesh.cells[ee]])
        out[e < 0] = np.nan
        return out

    def head(self, points) -> np.ndarray:
        """Total head (m) at points, an (n, 2) array of x, y in m; nan outside the section."""
        return self.interpolate(self.h, points)

    # ----------------------------------------------------------------- underseepage checks
    def exit_gradients(self, name: str, spacing: float | None = None, depth: float | None = None):
        """Exit gradients, heave and uplift factors of safety along the named boundary (the issue-3 API).

        The same as :func:`seepfe.checks.exit_gradients` (``result`` first); for the checks of a whole
        section, with the governing values and the verdict, use :func:`seepfe.analyse`. Returns a
        :class:`seepfe.checks.ExitChecks` (.x, .y m; .gradient, .blanket_gradient m/m; .fs -; .to_csv(path)).
        """
        from .checks.exit import exit_gradients     # kept for the pinned issue-3 API; checks never import result
        return exit_gradients(self, name, spacing=spacing, depth=depth)

    # ----------------------------------------------------------------- reporting
    def summary(self) -> dict:
        """Plain data of the solve itself: flows by boundary, balance, mesh and solver figures, input hash.
        (summary.json, with the checks and verdict, is ``seepfe.analyse(result).to_dict()``.)"""
        from .about import __version__
        return {
            "seepfe_version": __version__,
            "title": self.section.title,
            "source": self.section.source,
            "input_sha256": self.section.input_hash,
            "flows_m3_s_per_m": self.flows,
            "balance": self.balance,
            "head_range_m": [float(self.h.min()), float(self.h.max())],
            "mesh": dict(self.mesh.stats),
            "solver": dict(self.solver_info),
        }

    def __str__(self) -> str:
        """A short summary of the solve itself (no checks run behind a print: see seepfe.analyse)."""
        s = self.summary()
        sv = s["solver"]
        lines = [f"{self.section.title or self.section.source}",
                 f"  mesh: {s['mesh']['elements']} P{self.mesh.order} triangles, {s['mesh']['nodes']} nodes; "
                 f"solver {sv.get('backend', '?')}" + ("" if sv.get("converged", True) else ", NOT CONVERGED"),
                 "  flows (m3/s per m, + into the section):"]
        for k, v in s["flows_m3_s_per_m"].items():
            lines.append(f"    {k:<20s} {v:+.4e}")
        lines.append(f"  balance: relative error {s['balance']['relative_error']:.2e}")
        lines.append(f"  head range: {s['head_range_m'][0]:.3f} to {s['head_range_m'][1]:.3f} m")
        lines.append("  checks and verdict: seepfe.analyse(result)")
        lines.append(f"  {CAUTION}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return (f"<Result {self.section.title!r}: {self.mesh.n_elements} elements, "
                f"balance {self.balance['relative_error']:.1e}>")
