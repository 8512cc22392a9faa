"""The stream function of a solved section, and the numbers of a flow net (Nf, Nd).

The Darcy velocity v = -K grad h is divergence-free, so a stream function psi exists with

    grad psi = R v,   R = [[0, -1], [1, 0]]  (v rotated by +90 degrees),

and psi(B) - psi(A) is the flow (m3/s per m) across any curve from A to B.  Curl-freeness of
grad h = -K^-1 v then gives the conjugate problem

    div( K / det(K) grad psi ) = 0,

because R K^-1 R^T = K / det(K) for any symmetric 2x2 K.  For an isotropic zone this is
div((1/k) grad psi) = 0; across zones of different k, psi and the flow are continuous.

On the mesh of the head solve psi is the finite-element function (same order, same nodes) that
minimises the misfit energy  integral of (grad psi - R v)^T M (grad psi - R v) dA,  M = K / det(K),
whose Euler-Lagrange equation is the conjugate problem with the computed velocity as its source:

    integral grad(phi) . M grad(psi) dA = - integral grad(phi) . R grad(h) dA     for every phi,

(M R v = R K^-1 v = -R grad h, so the right-hand side needs only the head gradient).  It is a
pure Neumann problem: one node is fixed at psi = 0 and psi is shifted to start at 0.  No boundary
has to be sorted or traced, and internal barriers, drains and several inflow boundaries need no
special treatment.  Derivation and sources: docs/flownet.md.

Units: psi in m3/s per m of section; M in s/m.
"""

from __future__ import annotations

from dataclasses import dataclass, field
import numpy as np

from . import fem, linsolve

__all__ = ["StreamFunction", "stream_function", "FlowNet", "flow_net", "nice_step"]

_R = np.array([[0.0, -1.0], [1.0, 0.0]])


@dataclass(frozen=True, eq=False)
class StreamFunction:
    """psi at every mesh node (m3/s per m), and its range (= total flow through the section)."""

    psi: np.ndarray
    range: float
    misfit: float = field(default=0.0)   # relative L2 misfit |grad psi - R v|_M / |R v|_M


def stream_function(result) -> StreamFunction:
    """Solve the conjugate problem for the stream function on the result's own mesh.

    Parameters
    ----------
    result : seepfe.Result

    Returns
    -------
    StreamFunction
        ``psi`` (N,) m3/s per m, zero at its minimum; ``range`` = max - min, m3/s per m.
    """
    m = result.mesh
    K = result.element_K
    det = K[:, 0, 0] * K[:, 1, 1] - K[:, 0, 1] * K[:, 1, 0]
    M = K / det[:, None, None]                                 # conjugate conductivity, s/m
    Ke = fem.element_matrices(m.points, m.cells, M, m.order)
    A = fem.assemble(m.cells, Ke, m.n_nodes)
    inv, jdet = fem.jacobians(m.points, m.cells)
    xi, w = (fem.QUAD if m.order == 2 else (np.array([[1 / 3, 1 / 3]]), np.array([0.5])))
    G = fem.gradients(m.order, inv, xi)                        # (E, q, nloc, 2)
    gh = np.einsum("eqla,el->eqa", G, result.h[m.cells])       # grad h at quadrature points
    s = -np.einsum("eqla,ab,eqb->eql", G, _R, gh)              # -grad(phi) . R grad(h)
    be = np.einsum("q,eql->el", w, s) * jdet[:, None]
    b = np.zeros(m.n_nodes)
    np.add.at(b, m.cells.ravel(), be.ravel())
    # pure Neumann: pin one node (the first vertex) to zero; b sums to zero by construction
    free = np.arange(1, m.n_nodes)
    Aff = A[free][:, free].tocsr()
    psi = np.zeros(m.n_nodes)
    psi[free] = linsolve.factorize(Aff, "auto", 1e-12).solve(b[free])
    psi -= psi.min()
    # misfit of grad psi against the rotated velocity, in the M-norm (a self-check of the fit)
    gp = np.einsum("eqla,el->eqa", G, psi[m.cells])
    rv = np.einsum("ab,ebc,eqc->eqa", _R, -K, gh)              # R v
    d = gp - rv
    num = np.einsum("q,eqa,eab,eqb->e", w, d, M, d) * jdet
    den = np.einsum("q,eqa,eab,eqb->e", w, rv, M, rv) * jdet
    misfit = float(np.sqrt(num.sum() / max(den.sum(), 1e-300)))
    return StreamFunction(psi=psi, range=float(psi.max()), misfit=misfit)


def nice_step(span: float, target: int) -> float:
    """A round step (1, 2, 2.5 or 5 times a power of ten) giving about ``target`` intervals."""
    if not np.isfinite(span) or span <= 0:
        return 1.0
    raw = span / max(target, 1)
    p = 10.0 ** np.floor(np.log10(raw))
    for f in (1.0, 2.0, 2.5, 5.0, 10.0):
        if f * p >= raw * 0.999:
            return float(f * p)
    return float(10 * p)


@dataclass(frozen=True, eq=False)
class FlowNet:
    """The numbers of a flow net drawn on the result.

    Attributes
    ----------
    psi : (N,) stream function, m3/s per m (0 at its minimum).
    q_total : flow through the section from psi (its range), m3/s per m.
    q_solver : flow through the section from the solver's boundary reactions (inflow), m3/s per m.
    head_loss : H, highest minus lowest total head, m.
    n_drops : Nd, number of equal head drops between equipotentials (whole number).
    dh : head drop between neighbouring equipotentials, H / Nd, m.
    k_ref : conductivity that makes the figures square, m/s (sqrt(det K) of the reference zone).
    dpsi : flow in each channel, k_ref * dh, m3/s per m.
    n_channels : Nf = q_total / dpsi (usually not whole; the last channel is partial).
    reference_material : name of the material whose k_ref is used.
    squares : True when dpsi = k_ref * dh (a net of curvilinear squares where k = k_ref, and
        Nf / Nd = q / (k_ref H)); False for channels of equal flow q / Nf with no square rule.
    misfit : relative misfit of grad psi against the rotated velocity (-).
    """

    psi: np.ndarray
    q_total: float
    q_solver: float
    head_loss: float
    n_drops: int
    dh: float
    k_ref: float
    dpsi: float
    n_channels: float
    reference_material: str
    misfit: float
    h_min: float
    h_max: float
    squares: bool = True

    @property
    def shape_factor(self) -> float:
        """Nf / Nd, which equals q / (k H) for a homogeneous section (-)."""
        return self.n_channels / self.n_drops

    @property
    def equipotential_levels(self) -> np.ndarray:
        """Total heads of the equipotentials drawn between the extremes, m."""
        return self.h_min + self.dh * np.arange(1, self.n_drops)

    @property
    def flow_line_levels(self) -> np.ndarray:
        """Stream-function values of the flow lines drawn inside the section, m3/s per m."""
        n = int(np.floor(self.n_channels + 1e-9))
        lv = self.dpsi * np.arange(1, n + 1)
        return lv[lv < self.q_total * (1 - 1e-6)]

    def as_dict(self) -> dict:
        return {"n_channels_Nf": self.n_channels, "n_drops_Nd": self.n_drops, "Nf_over_Nd": self.shape_factor,
                "head_loss_m": self.head_loss, "head_drop_m": self.dh, "k_ref_m_s": self.k_ref,
                "reference_material": self.reference_material, "flow_per_channel_m3_s_per_m": self.dpsi,
                "q_stream_function_m3_s_per_m": self.q_total, "q_solver_m3_s_per_m": self.q_solver,
                "q_flow_net_m3_s_per_m": self.k_ref * self.head_loss * self.shape_factor,
                "stream_function_misfit": self.misfit, "square_net": self.squares}


def _reference_zone_k(result) -> tuple[float, str]:
    """sqrt(det K) of the material that carries the most flow (area x |v|), m/s, and its name."""
    m, sec = result.mesh, result.section
    p = m.points[m.triangles]
    area = 0.5 * np.abs((p[:, 1, 0] - p[:, 0, 0]) * (p[:, 2, 1] - p[:, 0, 1])
                        - (p[:, 2, 0] - p[:, 0, 0]) * (p[:, 1, 1] - p[:, 0, 1]))
    carried = np.bincount(m.zone, weights=area * np.linalg.norm(result.velocity, axis=1),
                          minlength=len(sec.spec.zones))
    mats = [z.material for z in sec.spec.zones]
    names = sorted(set(mats))
    per = {n: sum(c for c, mm in zip(carried, mats) if mm == n) for n in names}
    best = max(names, key=lambda n: per[n])
    zi = mats.index(best)
    Kz = sec.zone_tensors()[zi]
    return float(np.sqrt(np.linalg.det(Kz))), best


def flow_net(result, n_drops: int | None = None, k_ref: float | None = None,
             target_channels: float = 5.0, stream: "StreamFunction | None" = None) -> FlowNet:
    """Stream function and flow-net numbers for a solved section.

    Homogeneous section (one conductivity tensor everywhere), or ``k_ref`` given: the equipotentials
    are drawn at Nd equal drops of the total head loss H and the flow lines dpsi = k_ref H / Nd apart,
    so that the net is made of curvilinear squares and q = k H Nf / Nd (anisotropic: k_ref =
    sqrt(kx ky), the transformed-section rule).  Nd is chosen, between 6 and 40, to give about
    ``target_channels`` channels.

    Zones of different conductivity: squares can hold in one zone only, so the net shows
    ``target_channels`` channels of equal flow (dpsi = q / Nf) and Nd = 12 equal head drops
    (``squares`` is False; Nf / Nd is then not q / (k H)).

    Parameters
    ----------
    result : seepfe.Result
    n_drops : int, optional
        Number of equipotential drops Nd.
    k_ref : float, optional
        Reference conductivity (m/s) for a net of squares in the zones of that conductivity.
    stream : StreamFunction, optional
        The stream function of this result when already computed (:attr:`seepfe.Analysis.stream_function`
        keeps one per solve).
    """
    sf = stream if stream is not None else stream_function(result)
    hmin, hmax = float(result.h.min()), float(result.h.max())
    H = hmax - hmin
    bal = result.balance
    q_solver = 0.5 * (bal["inflow_m3_s_per_m"] + bal["outflow_m3_s_per_m"])
    Kz = result.section.zone_tensors()
    homogeneous = bool(np.allclose(Kz, Kz[:1], rtol=1e-12, atol=0.0))
    ref_name = "given"
    squares = homogeneous or k_ref is not None
    if k_ref is None:
        k_ref, ref_name = _reference_zone_k(result)
    if H <= 0 or sf.range <= 0:
        return FlowNet(sf.psi, sf.range, q_solver, max(H, 0.0), 1, max(H, 0.0), k_ref, max(sf.range, 1e-300),
                       0.0, ref_name, sf.misfit, hmin, hmax, squares=False)
    if squares:
        S = sf.range / (k_ref * H)                  # q / (k H)
        if n_drops is None:
            n_drops = int(np.clip(round(target_channels / max(S, 1e-12)), 6, 40))
        n_drops = max(int(n_drops), 1)
        dh = H / n_drops
        dpsi = k_ref * dh
        nf = sf.range / dpsi
        if nf > 60:                                 # a very pervious reference: keep the drawing legible
            squares = False
    if not squares:
        n_drops = max(int(n_drops or 12), 1)
        dh = H / n_drops
        nf = float(max(1, round(target_channels)))
        dpsi = sf.range / nf
    return FlowNet(psi=sf.psi, q_total=sf.range, q_solver=q_solver, head_loss=H, n_drops=n_drops, dh=dh,
                   k_ref=float(k_ref), dpsi=dpsi, n_channels=float(nf), reference_material=ref_name,
                   misfit=sf.misfit, h_min=hmin, h_max=hmax, squares=squares)
