"""Assemble and solve a section: boundary conditions, the seepage-face iteration, the result.

The boundary conditions on nodes and the active-set rule of the seepage faces and drains live in
:mod:`seepfe.bcs` (shared with the unconfined solve in :mod:`seepfe.unsaturated`).

Flows are consistent nodal reactions r = A h - f (m3/s per m, positive into the section), summed
over each boundary's nodes; a node shared by two reacting boundaries is split evenly between them.

``solver_info["times_s"]`` adds up: ``total = mesh + assemble + solve`` and ``solve = factor + iterate``,
where ``factor`` is every factorisation of the run (confined passes, the coarse saturated start, the
unconfined Newton LUs and Picard steps) and ``iterate`` the rest of the solve stage (triangular solves,
GMRES, relative conductivity, line searches); ``factorizations`` counts them all.
"""

from __future__ import annotations

import logging
import time

import numpy as np

from . import accuracy as accuracy_mod
from . import bcs, fem, unsaturated
from . import transient as transient_mod
from .bcs import Conditions, conditions
from .mesh import Mesh, make_mesh
from .result import Result
from .section import Section, load_section

__all__ = ["solve", "Conditions", "conditions"]

log = logging.getLogger("seepfe")

#: settle the seepage faces with saturated passes before the unconfined solve starts (the shells of zoned dams
#: then start drained to their outlets instead of held at h = y on the whole downstream face)
SETTLE_FACES_FIRST = True

#: kept for callers of the former private helper
_solve_fixed = bcs.solve_fixed


def solve(section, *, order: int | None = None, size: float | None = None, mesh: Mesh | None = None,
          linear: str | None = None, accuracy: float | None = None, keep_factorization: bool = False) -> Result:
    """Mesh, assemble and solve a section for the steady head field.

    Parameters
    ----------
    section : Section, dict or path
        A validated section (or anything :func:`seepfe.load_section` takes).
    order : {1, 2}, optional
        Element order (default: the section's ``mesh.order``, 2).
    size : float, optional
        Element size in m (default: the section's ``mesh.size`` or extent / 60).
    mesh : Mesh, optional
        A ready mesh of this section (skips meshing).
    linear : {"auto", "direct", "amg"}, optional
        Linear solver (default: the section's ``solver.linear``).
    accuracy : float, optional
        Requested relative discretisation error of the flows (default: the section's ``solver.accuracy``;
        0 or None: the mesh as specified). When set and neither ``mesh`` nor ``size`` is given, the mesh is
        chosen by :func:`seepfe.accuracy.solve_to_accuracy`.
    keep_factorization : bool
        Keep the factorisation of the free-free block of a confined solve in ``Result.factorization`` (for
        sensitivities by back-substitution, :mod:`seepfe.calibration`); None after an unconfined solve.

    Returns
    -------
    Result
        Heads, gradients, velocities, boundary flows and solver figures. A section with a ``hydrograph`` on a
        head boundary is solved through time instead (:func:`seepfe.transient.solve_transient`): the return is a
        :class:`seepfe.transient.TransientResult` (``times`` in s, ``at(t)`` a Result of that moment).
    """
    if not isinstance(section, Section):
        section = load_section(section)
    if any(b.hydrograph is not None for b in section.spec.boundaries):
        # a flood hydrograph on a head boundary: the transient solve (issue 14, docs/transient.md)
        return transient_mod.solve_transient(section, order=order, size=size, mesh=mesh, linear=linear)
    if accuracy is None:
        accuracy = section.spec.solver.accuracy
    if accuracy and mesh is None and size is None:
        return accuracy_mod.solve_to_accuracy(section, accuracy, order=order, linear=linear)
    t0 = time.perf_counter()
    if mesh is None:
        mesh = make_mesh(section, order=order, size=size)
    t1 = time.perf_counter()
    log.info("mesh: %d P%d triangles, %d nodes (%.2f s)", mesh.n_elements, mesh.order, mesh.n_nodes, t1 - t0)
    sspec = section.spec.solver
    method = linear or sspec.linear
    Kz = section.zone_tensors()
    Ke = fem.element_matrices(mesh.points, mesh.cells, Kz[mesh.zone], mesh.order)
    A = fem.assemble(mesh.cells, Ke, mesh.n_nodes)
    t2 = time.perf_counter()
    bc = conditions(section, mesh)
    y = mesh.points[:, 1]
    face_fixed = bc.face_start.copy()
    cache: dict = {}
    htol = section.head_tol
    converged = False
    history = []
    it = 0
    start = None
    if sspec.phreatic == "auto" and sspec.nonlinear == "newton":
        # a nested (split) mesh: the first saturated solve on its coarsest level; partly dry there, the
        # unconfined solve starts from it and the saturated solve of this mesh is not needed
        start = unsaturated.saturated_start(section, mesh, method, sspec.tolerance)
        if start is not None:
            cache = start[3]
    for it in range(1, 0 if start is not None else sspec.max_iterations + 1):
        fixed, values = bcs.fixed_set(bc, face_fixed, y)
        h = bcs.solve_fixed(A, bc.load, fixed, values, method, sspec.tolerance, cache)
        if it == 1:
            first = (h, face_fixed.copy())
        if (it == 1 and not SETTLE_FACES_FIRST and sspec.phreatic == "auto"
                and unsaturated.is_partly_dry(mesh, h, section.head_tol)):
            break          # partly dry: the faces are iterated inside the unconfined solve below
        if len(bc.face_nodes) == 0:
            converged = True
            break
        new_face, release, catch = bcs.update_active(bc, face_fixed, A @ h - bc.load, h, y, htol)
        history.append(int(face_fixed.sum()))
        log.info("seepage-face pass %d: %d of %d face nodes held at h = y", it, int(face_fixed.sum()),
                 len(bc.face_nodes))
        if not release.any() and not catch.any():
            converged = True
            break
        face_fixed = new_face
    unconf = None
    if start is not None or (sspec.phreatic == "auto" and unsaturated.is_partly_dry(mesh, h, section.head_tol)):
        # part of the section lies above the phreatic surface: saturated-unsaturated solve (issue 4)
        unconf = unsaturated.solve_unconfined(
            section, mesh, Ke, bc, None if start is not None else h, face_fixed, method=sspec.nonlinear,
            linear=method, tol=sspec.tolerance, max_iterations=sspec.max_iterations, start=start)
        if not unconf.converged and start is None and SETTLE_FACES_FIRST and it > 1:
            # from the settled faces it did not converge: once more from the first saturated pass
            again = unsaturated.solve_unconfined(
                section, mesh, Ke, bc, first[0], first[1], method=sspec.nonlinear, linear=method,
                tol=sspec.tolerance, max_iterations=sspec.max_iterations)
            for key in ("iterations", "factorizations", "linear_solves", "krylov_iterations"):
                again.info[key] += unconf.info[key]
            again.info["times_s"]["factor"] += unconf.info["times_s"]["factor"]
            again.info["restarts"] += 1
            if again.converged or again.info["relative_residual"] < unconf.info["relative_residual"]:
                unconf = again
        h, A, fixed, face_fixed = unconf.h, unconf.matrix, unconf.fixed, unconf.face_active
        converged = unconf.converged     # the active set of the faces is iterated inside it
    t3 = time.perf_counter()
    log.info("solved: %d unknowns, %s (%.2f s)", A.shape[0] - len(fixed),
             "converged" if converged else "NOT converged", t3 - t2)
    reactions = A @ h - bc.load
    solver = cache["solver"]
    n_fact = cache.get("factorizations", 0)
    t_fact = cache.get("factor_s", 0.0)
    if unconf is not None:
        n_fact += unconf.info["factorizations"]
        t_fact += unconf.info["times_s"]["factor"]
    info = {
        "linear_solver": solver.method, "backend": solver.backend, "unknowns": int(A.shape[0] - len(fixed)),
        "nonzeros": int(A.nnz), "seepage_face_passes": it, "factorizations": int(n_fact),
        "converged": bool(converged),
        # total = mesh + assemble + solve; solve = factor + iterate (module docstring)
        "times_s": {"mesh": round(t1 - t0, 4), "assemble": round(t2 - t1, 4), "factor": round(t_fact, 4),
                    "iterate": round(max(t3 - t2 - t_fact, 0.0), 4), "solve": round(t3 - t2, 4),
                    "total": round(t3 - t0, 4)},
    }
    if solver.method == "amg":
        info["amg_iterations"] = int(solver.iterations)
    if unconf is not None:
        info["unconfined"] = unconf.info
    if not converged and unconf is None:
        log.warning("seepage-face iteration did not settle in %d passes", it)
    return Result(section=section, mesh=mesh, h=h, reactions=reactions, load=bc.load,
                  fixed=np.sort(fixed), solver_info=info, matrix=A,
                  element_K=Kz[mesh.zone] if unconf is None else Kz[mesh.zone] * unconf.kr[:, None, None],
                  kr=None if unconf is None else unconf.kr,
                  face_nodes=bc.face_nodes, face_active=face_fixed.copy(),
                  factorization=cache["solver"] if keep_factorization and unconf is None else None)


accuracy_mod.register_solver(solve)
transient_mod.register_steady(solve)
