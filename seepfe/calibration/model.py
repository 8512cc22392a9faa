"""The forward model of a calibration: fitted values -> computed readings, and their sensitivities.

For each event the section dict gets the event's fixed values and the trial values of the fitted keys
(:func:`seepfe.params.with_values`, so parameters and expressions work), is loaded and solved on a mesh made
once per geometry (a conductivity changes no geometry), and the heads at the piezometer tips (shape
functions of the element holding each tip) and the flows across the measured boundaries (consistent nodal
reactions, split as :attr:`seepfe.Result.flows` splits them) are read off.

Sensitivities (the Jacobian of the computed readings with respect to the fitted values, in the fit's
coordinates: ln k for conductivities):

* a confined solve (every element saturated) and a key that changes only conductivities: by one
  back-substitution per key with the factorisation the forward solve made. With the prescribed heads and
  the outflow points' active set held, ``A(p) h = f`` gives on the free nodes
  ``dh/dp = -A_ff^-1 (dA/dp h - df/dp)``, with ``df/dp = 0`` (a prescribed flux does not depend on k) and
  ``dA/dp`` assembled from the element matrices of the zones whose tensor changes (the element matrix is
  linear in the tensor, so ``dA/dp`` is the assembly of ``dK/dp``). ``dK/dp`` of each material is taken from
  the material's tensor as the file defines it (central difference in the fit coordinate of
  :func:`seepfe.conductivity.conductivity_tensor`, exact to round-off for a tensor linear in k). The flows
  follow from ``dr/dp = dA/dp h + A dh/dp``.
* otherwise (an unconfined solve: the relative conductivity depends on the heads; or a key that changes
  geometry or boundary values): forward finite differences of whole solves.
"""

from __future__ import annotations

import json
import logging
from collections import OrderedDict
from dataclasses import dataclass, field

import numpy as np
import scipy.sparse as sp

from .. import fem
from ..errors import SectionError, SolverError

__all__ = ["ForwardModel", "Evaluation", "geometry_signature", "material_tensors"]

log = logging.getLogger("seepfe")

#: step of the central difference of a material tensor in the fit coordinate (ln k), -
TENSOR_STEP = 1e-6
#: step of the forward finite differences of whole solves in the fit coordinate: confined, unconfined
FD_STEP = {"confined": 1e-4, "unconfined": 1e-3}


def geometry_signature(section) -> str:
    """What the mesh depends on: zones, boundary and barrier lines, mesh controls (not k, not heads)."""
    s = section.spec
    d = {"zones": [(z.name, z.polygon) for z in s.zones],
         "boundaries": [(b.name, b.polyline) for b in s.boundaries],
         "barriers": [(b.name, b.polyline) for b in s.barriers],
         "mesh": s.mesh.model_dump()}
    return json.dumps(d, sort_keys=True, default=str)


def material_tensors(data: dict, label: str = "<section>") -> dict:
    """{material: 2x2 conductivity tensor, m/s} of a section dict (parameters resolved, units to SI)."""
    from .. import params
    from ..conductivity import conductivity_tensor
    from ..schema import MaterialSpec
    from ..units import parse_units, to_si
    res = params.resolve(data, label)
    units = parse_units(data.get("units"), label)
    out = {}
    for name, m in (res.get("materials") or {}).items():
        if isinstance(m, dict):
            out[name] = conductivity_tensor(to_si(MaterialSpec, m, units, label))
    return out


@dataclass
class Evaluation:
    """The computed readings at one point of the fit."""

    theta: np.ndarray
    values: dict                       # key -> value, section file's units
    computed: list                     # per event: (heads m, flows m3/s per m)
    residual: np.ndarray               # (computed - observed) / sigma, all events
    results: list = field(repr=False)  # per event: Result

    @property
    def chi2(self) -> float:
        return float(self.residual @ self.residual)


class ForwardModel:
    """Readings computed from the fitted values; sensitivities reusing the forward factorisation.

    ``keys``: the :class:`~seepfe.calibration.observations.FitKey` fitted (their order is the order of
    ``theta``); ``held``: {key: value in the file's units} applied but not fitted.
    """

    def __init__(self, data: dict, label: str, obs, keys: list, held: dict | None = None, *, order=None,
                 size=None, linear=None):
        self.data, self.label, self.obs = data, label, obs
        self.keys = list(keys)
        self.held = dict(held or {})
        self.order, self.size, self.linear = order, size, linear
        self._meshes: dict = {}
        self._probes: dict = {}
        self._cache: OrderedDict = OrderedDict()
        self.history: list[float] = []       # chi2 of every new evaluation, in order
        self.solves = 0
        self.sensitivity_methods: set = set()
        self.values_shown: dict = {}         # the values of the solve under way (for its error message)
        self._material_only: dict | None = None
        self.observed = np.concatenate([np.concatenate([e.heads, e.flows]) for e in obs.events])
        self.sigma = np.concatenate([np.concatenate([e.head_sigma, e.flow_sigma]) for e in obs.events])

    # ------------------------------------------------------------------ values and sections
    def values(self, theta) -> dict:
        out = dict(self.held)
        for k, t in zip(self.keys, np.atleast_1d(theta)):
            out[k.key] = k.from_theta(t)
        return out

    def section_dict(self, fixed: dict, values: dict) -> dict:
        from ..params import with_values
        return with_values(self.data, {**fixed, **values}, self.label)

    def section(self, fixed: dict, values: dict, what: str = ""):
        import dataclasses

        from ..section import load_section
        try:
            sec = load_section(self.section_dict(fixed, values))
        except SectionError as e:
            shown = ", ".join(f"{k} = {v:.4g}" for k, v in values.items())
            raise SectionError(f"{self.label}{what}: with {shown}: {str(e).removeprefix('<dict>: ')}") from None
        return dataclasses.replace(sec, source=self.label)

    def mesh_for(self, section):
        from ..mesh import make_mesh
        sig = geometry_signature(section)
        m = self._meshes.get(sig)
        if m is None:
            m = make_mesh(section, order=self.order, size=self.size)
            self._meshes[sig] = m
        return m

    def probes(self, result, ev_index: int):
        """(P, W): heads at the tips = P @ h; flows = W @ reactions (rows in the event's reading order)."""
        key = (id(result.mesh), ev_index)
        hit = self._probes.get(key)
        if hit is not None and hit[0] is result.mesh:
            return hit[1], hit[2]
        ev = self.obs.events[ev_index]
        m = result.mesh
        e, xi = result.locate(ev.points)
        if (e < 0).any():
            i = int(np.flatnonzero(e < 0)[0])
            x, y = ev.points[i]
            raise SectionError(f"{self.obs.label}: {ev.where}heads[{i}] '{ev.head_names[i]}': the point "
                               f"({x:.6g}, {y:.6g}) m lies outside the meshed section")
        N = fem.shape(m.order, xi)
        rows = np.repeat(np.arange(len(e)), N.shape[1])
        P = sp.csr_matrix((N.ravel(), (rows, m.cells[e].ravel())), shape=(len(e), m.n_nodes))
        W = np.zeros((len(ev.flow_boundaries), m.n_nodes))
        for i, name in enumerate(ev.flow_boundaries):
            W[i] = flow_weights(result, name, f"{self.obs.label}: {ev.where}flows[{i}]")
        self._probes[key] = (m, P, W)
        return P, W

    # ------------------------------------------------------------------ evaluation
    def solve(self, section, mesh, keep: bool):
        from ..solver import solve
        self.solves += 1
        r = solve(section, mesh=mesh, linear=self.linear, keep_factorization=keep)
        if not r.solver_info.get("converged", True):
            raise SolverError(f"{self.label}: the solve did not converge at "
                              + ", ".join(f"{k} = {v:.4g}" for k, v in self.values_shown.items())
                              + "; narrow the bounds of 'fit' or see solver.max_iterations")
        return r

    def evaluate(self, theta) -> Evaluation:
        theta = np.asarray(theta, float)
        key = theta.tobytes()
        if key in self._cache:
            self._cache.move_to_end(key)
            return self._cache[key]
        values = self.values(theta)
        self.values_shown = values
        computed, results = [], []
        for i, ev in enumerate(self.obs.events):
            sec = self.section(ev.fixed, values, f" (event '{ev.name}')")
            r = self.solve(sec, self.mesh_for(sec), keep=True)
            P, W = self.probes(r, i)
            h, q = P @ r.h, W @ r.reactions
            computed.append((h, q))
            results.append(r)
        c = np.concatenate([np.concatenate([h, q]) for h, q in computed])
        ev_ = Evaluation(theta=theta.copy(), values=values, computed=computed,
                         residual=(c - self.observed) / self.sigma, results=results)
        self.history.append(ev_.chi2)
        self._cache[key] = ev_
        while len(self._cache) > 3:
            self._cache.popitem(last=False)
        return ev_

    def residual(self, theta) -> np.ndarray:
        return self.evaluate(theta).residual

    # ------------------------------------------------------------------ sensitivities
    def material_only(self) -> dict:
        """{key: True} where changing the key changes nothing but the materials (checked once, per event)."""
        if self._material_only is None:
            from .. import params
            theta0 = np.array([k.to_theta(np.clip(k.start, k.lo, k.hi)) for k in self.keys], float)
            v0 = self.values(theta0)
            out = {}
            for j, k in enumerate(self.keys):
                t1 = theta0.copy()
                t1[j] += 0.1 if k.scale == "log" else 0.1 * (k.hi - k.lo)
                v1 = self.values(t1)
                same = True
                for ev in self.obs.events:
                    a = params.resolve(self.section_dict(ev.fixed, v0), self.label)
                    b = params.resolve(self.section_dict(ev.fixed, v1), self.label)
                    a.pop("materials", None)
                    b.pop("materials", None)
                    same &= a == b
                out[k.key] = bool(same)
            self._material_only = out
        return self._material_only

    def zone_tensor_derivatives(self, theta, ev, section) -> list:
        """Per fitted key: (Z, 2, 2) d(zone tensor)/d(theta_j), m/s per unit of theta (None: not material-only)."""
        out = []
        mo = self.material_only()
        zmat = [z.material for z in section.spec.zones]
        for j, k in enumerate(self.keys):
            if not mo[k.key]:
                out.append(None)
                continue
            step = TENSOR_STEP if k.scale == "log" else TENSOR_STEP * max(abs(float(theta[j])), k.hi - k.lo)
            tp, tm = theta.copy(), theta.copy()
            tp[j] += step
            tm[j] -= step
            Tp = material_tensors(self.section_dict(ev.fixed, self.values(tp)), self.label)
            Tm = material_tensors(self.section_dict(ev.fixed, self.values(tm)), self.label)
            dK = {n: (Tp[n] - Tm[n]) / (2 * step) for n in Tp}
            out.append(np.array([dK.get(m, np.zeros((2, 2))) for m in zmat]))
        return out

    def jacobian(self, theta) -> np.ndarray:
        """d(residual)/d(theta): (readings, keys), each row divided by its sigma."""
        theta = np.asarray(theta, float)
        base = self.evaluate(theta)
        cols = []
        for i, ev in enumerate(self.obs.events):
            r = base.results[i]
            sec = r.section
            P, W = self.probes(r, i)
            J = np.zeros((len(ev.heads) + len(ev.flows), len(self.keys)))
            confined = r.factorization is not None and r.kr is None
            dKz = self.zone_tensor_derivatives(theta, ev, sec) if confined else [None] * len(self.keys)
            fd = [j for j in range(len(self.keys)) if dKz[j] is None]
            if confined and len(fd) < len(self.keys):
                J[:, [j for j in range(len(self.keys)) if dKz[j] is not None]] = self._direct(
                    r, P, W, [d for d in dKz if d is not None])
                self.sensitivity_methods.add("back-substitution")
            for j in fd:
                J[:, j] = self._finite_difference(theta, j, i, base, "confined" if r.kr is None else "unconfined")
                self.sensitivity_methods.add("finite differences")
            cols.append(J)
        return np.vstack(cols) / self.sigma[:, None]

    def _direct(self, r, P, W, dKz_list) -> np.ndarray:
        m = r.mesh
        n = m.n_nodes
        free = np.ones(n, bool)
        free[r.fixed] = False
        fi = np.flatnonzero(free)
        out = np.zeros((P.shape[0] + W.shape[0], len(dKz_list)))
        for j, dKz in enumerate(dKz_list):
            nz = np.abs(dKz).reshape(len(dKz), -1).max(axis=1) > 0
            sel = nz[m.zone]
            if not sel.any():
                continue
            cells = m.cells[sel]
            dKe = fem.element_matrices(m.points, cells, dKz[m.zone[sel]], m.order)
            dA = fem.assemble(cells, dKe, n)
            g = dA @ r.h                                   # dA/dp h (df/dp = 0)
            dh = np.zeros(n)
            dh[fi] = r.factorization.solve(-g[fi])
            out[:P.shape[0], j] = P @ dh
            if W.shape[0]:
                out[P.shape[0]:, j] = W @ (g + r.matrix @ dh)
        return out

    def _finite_difference(self, theta, j: int, i: int, base: Evaluation, kind: str) -> np.ndarray:
        k = self.keys[j]
        step = FD_STEP[kind] if k.scale == "log" else FD_STEP[kind] * max(k.hi - k.lo, abs(float(theta[j])))
        t1 = theta.copy()
        # step inward when the point sits on its upper bound
        hi = k.to_theta(k.hi)
        if t1[j] + step > hi:
            step = -step
        t1[j] += step
        ev = self.obs.events[i]
        values = self.values(t1)
        self.values_shown = values
        sec = self.section(ev.fixed, values, f" (event '{ev.name}')")
        r = self.solve(sec, self.mesh_for(sec), keep=False)
        P, W = self.probes(r, i)
        h0, q0 = base.computed[i]
        return (np.concatenate([P @ r.h, W @ r.reactions]) - np.concatenate([h0, q0])) / step


def flow_weights(result, name: str, label: str = "<observations>: flows") -> np.ndarray:
    """(N,) weights w with flow = w . reactions: the boundary's nodes, a node shared by several reacting
    boundaries (and drain zones) split evenly, as :attr:`seepfe.Result.flows` does."""
    from ..drains import drain_zone_nodes
    sec, m = result.section, result.mesh
    kinds = [b.kind for b in sec.spec.boundaries]
    count = np.zeros(m.n_nodes)
    for i, k in enumerate(kinds):
        if k != "flux":
            count[m.boundary_nodes(i)] += 1
    drains = drain_zone_nodes(sec, m)
    for nd in drains.values():
        count[nd] += 1
    w = np.zeros(m.n_nodes)
    if name in sec.boundary_names:
        i = sec.boundary_names.index(name)
        if kinds[i] == "flux":
            raise SectionError(f"{label}: boundary '{name}' prescribes its flux, so its flow "
                               "is an input, not a result to fit; measure a head or drain boundary")
        nd = m.boundary_nodes(i)
    elif name in drains:
        nd = drains[name]
    else:
        import difflib
        known = sec.boundary_names + list(drains)
        near = difflib.get_close_matches(name, known, n=1)
        hint = f" (did you mean '{near[0]}'?)" if near else f" (known: {', '.join(known)})"
        raise SectionError(f"{label}: no boundary or drain zone named '{name}'{hint}")
    w[nd] = 1.0 / count[nd]
    return w
