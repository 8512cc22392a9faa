"""What the figures show: the flow net against published solutions, contour levels, the exit profile.

Sources:
* Harr, M.E. (1962), Groundwater and Seepage, McGraw-Hill, ch. 5 (from memory): a single sheet pile
  driven to depth s into a pervious stratum of thickness T, heads differing by H on either side,
  q / (k H) = K(m') / (2 K(m)),  m = sin(pi s / (2 T)), m' = sqrt(1 - m^2),
  K the complete elliptic integral of the first kind (modulus m; scipy's ellipk takes m^2).
  For s = T / 2 this is exactly 1/2.
* The flow-net rule q = k H Nf / Nd and the transformed section for anisotropy (k' = sqrt(kx ky),
  x scaled by sqrt(ky / kx)): Casagrande (1937), Seepage through dams; Harr (1962) ch. 2;
  Cedergren (1989), Seepage, Drainage, and Flow Nets, ch. 4 (from memory).
* Impervious boundaries are flow lines (the stream function is constant along them): Harr (1962) ch. 2.
"""


import numpy as np
import pytest
from scipy.special import ellipk

import seepfe
from seepfe import plot
from seepfe.flownet import flow_net, stream_function


def harr_sheet_pile(s, T):
    """q / (k H) for a sheet pile of depth s in a stratum of thickness T (Harr 1962, see above)."""
    m = np.sin(np.pi * s / (2 * T))
    return ellipk(1 - m * m) / (2 * ellipk(m * m))


def sheet_pile(T=10.0, s=5.0, L=40.0, H=3.0, order=2, size=0.9, mat=None, notch=0.04):
    """A homogeneous stratum cut by a sheet pile, modelled as a thin notch (no barrier key needed)."""
    w = notch / 2
    poly = [[-L, -T], [L, -T], [L, 0], [w, 0], [w, -s], [-w, -s], [-w, 0], [-L, 0]]
    return {"title": "Invented sheet pile in a sand stratum",
            "materials": {"sand": mat or {"k": 1e-5}},
            "zones": [{"name": "stratum", "material": "sand", "polygon": poly}],
            "boundaries": [{"name": "upstream", "polyline": [[-L, 0], [-w, 0]], "head": H},
                           {"name": "downstream", "polyline": [[w, 0], [L, 0]], "head": 0.0}],
            "mesh": {"size": size, "order": order, "refine": [{"point": [0, -s], "size": 0.06, "width": 0.3}]}}


def sheet_pile_barrier(**kw):
    """The same with a zero-thickness barrier (section key 'barriers'), where this version has it."""
    sec = sheet_pile(**kw)
    T, s, L = kw.get("T", 10.0), kw.get("s", 5.0), kw.get("L", 40.0)
    sec["zones"][0]["polygon"] = [[-L, -T], [L, -T], [L, 0], [-L, 0]]
    sec["boundaries"] = [{"name": "upstream", "polyline": [[-L, 0], [0, 0]], "head": kw.get("H", 3.0)},
                         {"name": "downstream", "polyline": [[0, 0], [L, 0]], "head": 0.0}]
    sec["barriers"] = [{"name": "sheet pile", "polyline": [[0, 0], [0, -s]]}]
    return sec


def _solve_or_skip(sec):
    try:
        return seepfe.solve(sec)
    except seepfe.SectionError as e:
        if "barriers" in str(e):
            pytest.skip(f"this version has no 'barriers' key: {e}")
        raise


def _drawn_levels(cs):
    return np.asarray(cs.levels, float)


@pytest.mark.parametrize("build", [sheet_pile, sheet_pile_barrier], ids=["notch", "barrier"])
def test_flow_net_of_a_sheet_pile_matches_solver_and_harr(build):
    k, H = 1e-5, 3.0
    r = _solve_or_skip(build())
    fig = plot.flow_net_figure(r)
    net = fig.seepfe_flow_net
    assert net.squares
    # read Nd and Nf back from what is drawn: equally spaced equipotentials and flow lines
    eq = _drawn_levels(fig.seepfe_contours["equipotentials"])
    fl = _drawn_levels(fig.seepfe_contours["flow_lines"])
    dh = np.diff(eq)
    assert np.allclose(dh, dh[0], rtol=1e-9) and dh[0] == pytest.approx(H / (len(eq) + 1), rel=1e-9)
    Nd = len(eq) + 1
    dpsi = np.diff(fl)
    assert np.allclose(dpsi, dpsi[0], rtol=1e-9)
    assert dpsi[0] == pytest.approx(k * dh[0], rel=1e-9)               # squares: dpsi = k dh
    Nf = net.q_total / dpsi[0]
    assert len(fl) == int(np.floor(Nf))
    q_solver = r.boundary_flow("upstream")
    assert Nf / Nd == pytest.approx(q_solver / (k * H), rel=0.01)
    # Harr (1962): s = T/2 gives exactly 1/2; the 4 cm notch and the finite length cost < 1 %
    assert harr_sheet_pile(5.0, 10.0) == pytest.approx(0.5, abs=1e-12)
    assert Nf / Nd == pytest.approx(harr_sheet_pile(5.0, 10.0), rel=0.02)


def test_stream_function_is_constant_along_impervious_boundaries():
    # the base of the stratum and the pile faces are flow lines (Harr 1962, ch. 2)
    r = seepfe.solve(sheet_pile(order=2, size=0.7))
    sf = stream_function(r)
    P = r.mesh.points
    base = np.abs(P[:, 1] + 10.0) < 1e-9
    # the faces of the pile, away from the singular corners at the ground surface and at the tip
    pile = (np.abs(np.abs(P[:, 0]) - 0.02) < 1e-9) & (P[:, 1] < -0.25) & (P[:, 1] > -4.75)
    assert np.ptp(sf.psi[base]) < 0.01 * sf.range
    assert np.ptp(sf.psi[pile]) < 0.01 * sf.range
    assert abs(sf.psi[base].mean() - sf.psi[pile].mean()) == pytest.approx(sf.range, rel=0.01)
    assert sf.range == pytest.approx(r.boundary_flow("upstream"), rel=0.01)


def test_anisotropic_flow_net_uses_the_transformed_section():
    # kx = 4 ky: in the transformed section (x' = x sqrt(ky/kx)) the stratum is unchanged in depth and
    # still long, so Harr's s = T/2 result holds with k' = sqrt(kx ky) (Casagrande 1937; Harr 1962)
    kx, ky, H = 4e-5, 1e-5, 3.0
    r = seepfe.solve(sheet_pile(L=60.0, size=1.2, mat={"kx": kx, "ky": ky}))
    net = flow_net(r)
    kp = np.sqrt(kx * ky)
    assert net.k_ref == pytest.approx(kp, rel=1e-12)
    assert net.shape_factor == pytest.approx(r.boundary_flow("upstream") / (kp * H), rel=0.01)
    assert net.shape_factor == pytest.approx(0.5, rel=0.02)


def test_stream_function_is_right_across_zones_of_different_k():
    # two layers 10x apart in k under a sheet pile: the stream-function range must still be the flow
    # the solver's reactions give (continuity of flow across the interface)
    sec = sheet_pile(size=1.0)
    sec["materials"] = {"silt": {"k": 1e-6}, "sand": {"k": 1e-5}}
    left = [[-40, -3], [-0.02, -3], [-0.02, 0], [-40, 0]]
    right = [[0.02, -3], [40, -3], [40, 0], [0.02, 0]]
    lower = [[-40, -10], [40, -10], [40, -3], [0.02, -3], [0.02, -5], [-0.02, -5], [-0.02, -3], [-40, -3]]
    sec["zones"] = [{"name": "top left", "material": "silt", "polygon": left},
                    {"name": "top right", "material": "silt", "polygon": right},
                    {"name": "bottom", "material": "sand", "polygon": lower}]
    r = seepfe.solve(sec)
    net = flow_net(r)
    assert not net.squares                                     # squares cannot hold in both layers
    assert net.q_total == pytest.approx(r.boundary_flow("upstream"), rel=0.01)
    assert net.n_channels == pytest.approx(net.q_total / net.dpsi, rel=1e-12)


@pytest.mark.parametrize("vmin, vmax", [(0.0, 4.5), (-3.7, 12.2), (101.3, 101.9), (-250.0, 310.0), (2.0, 2.0)])
def test_contour_levels_are_round_and_inside_the_range(vmin, vmax):
    lv = plot.contour_levels(vmin, vmax, 12)
    if vmax == vmin:
        assert len(lv) == 0
        return
    assert len(lv) >= 4
    assert np.all(lv > vmin) and np.all(lv < vmax)
    step = np.diff(lv)
    assert np.allclose(step, step[0])
    mant = step[0] / 10 ** np.floor(np.log10(step[0]))
    assert any(np.isclose(mant, m) for m in (1, 2, 2.5, 5))      # common practice: 1-2-2.5-5 steps


def test_head_and_pressure_figures_contour_inside_the_range():
    r = seepfe.solve(sheet_pile(order=1, size=1.5))
    for q in ("total_head", "pressure_head", "pore_pressure"):
        fig = plot.field_figure(r, q)
        lo, hi = fig.seepfe_range
        v = {"total_head": r.h, "pressure_head": r.pressure_head, "pore_pressure": r.pore_pressure}[q]
        assert lo == pytest.approx(v.min()) and hi == pytest.approx(v.max())
        lv = np.asarray(fig.seepfe_contours["lines"].levels)
        assert np.all((lv > lo) & (lv < hi)) and len(lv) >= 5
    # every level drawn is a whole multiple of the (round) interval
    lv = np.asarray(plot.field_figure(r, "total_head").seepfe_contours["lines"].levels)
    ratio = lv / (lv[1] - lv[0])
    assert np.allclose(ratio, np.round(ratio), atol=1e-9)


def test_phreatic_line_of_a_confined_section_is_empty_and_of_a_dam_is_drawn():
    r = seepfe.solve(sheet_pile(order=1, size=1.5))
    assert plot.phreatic_lines(r) == [] or all(len(p) == 0 for p in plot.phreatic_lines(r))
    # a homogeneous rectangular dam with a toe drain: water table falls from the reservoir to the drain
    dam = {"materials": {"fill": {"k": 1e-6}},
           "zones": [{"name": "dam", "material": "fill", "polygon": [[0, 0], [20, 0], [20, 8], [0, 8]]}],
           "boundaries": [{"name": "reservoir", "polyline": [[0, 0], [0, 8]], "head": 6.0},
                          {"name": "toe", "polyline": [[16, 0], [20, 0]], "drain": True}],
           "mesh": {"size": 0.8, "order": 1}}
    r = seepfe.solve(dam)
    lines = plot.phreatic_lines(r)
    assert lines and max(len(p) for p in lines) > 3
    pts = np.vstack(lines)
    # on the line the pressure head is zero, so its elevation equals the total head there
    inside = (pts[:, 0] > 0.5) & (pts[:, 0] < 15.5)
    assert np.allclose(r.head(pts[inside]), pts[inside, 1], atol=0.05)
    # and it falls as Dupuit's parabola y^2 = H^2 (1 - x / x_d) to the drain at x_d = 16 m (Dupuit, J.
    # (1863), Etudes theoriques et pratiques sur le mouvement des eaux; approximate for the surface,
    # measured within 0.05 m on this mesh)
    x = np.array([0.5, 4.0, 8.0, 12.0, 15.0])
    order = np.argsort(pts[:, 0])
    y = np.interp(x, pts[order, 0], pts[order, 1])
    assert np.allclose(y, np.sqrt(36.0 * (1 - x / 16.0)), atol=0.3)


class StandIn:
    """A minimal exit-gradient profile (the API of result.exit_gradients), for the figure alone."""

    def __init__(self):
        self.boundary = "landside"
        self.x = np.linspace(21, 81, 61)
        self.y = np.zeros(61)
        self.distance_from_toe = self.x - 21
        self.gradient = 0.9 * np.exp(-self.distance_from_toe / 15) + 0.05
        self.blanket_gradient = 0.8 * np.exp(-self.distance_from_toe / 20)
        self.i_critical = np.full(61, 0.88)
        self.fs_heave = np.where(self.gradient > 0, self.i_critical / self.gradient, np.inf)
        self.fs_uplift = np.full(61, np.inf)
        self.fs = np.fmin(self.fs_heave, self.fs_uplift)
        self.criteria = {"fs_heave": 1.5, "fs_uplift": 1.5, "allowable_gradient": 0.5}
        self.passes = (self.fs >= 1.5) & (np.fmax(self.gradient, self.blanket_gradient) <= 0.5)


def test_exit_gradient_profile_shades_the_failing_stretch():
    p = StandIn()
    fig = plot.exit_gradient_figure(p)
    stretches = fig.seepfe_failing
    fail_d = p.distance_from_toe[~p.passes]
    assert len(stretches) == 1
    a, b = stretches[0]
    assert a == pytest.approx(0.0) and fail_d.max() <= b <= fail_d.max() + 1.0 + 1e-9
    # the shaded patches on both panels span the same stretch
    for ax in fig.axes:
        spans = [pt for pt in ax.patches]
        assert len(spans) == 1
        x0 = spans[0].get_x() if hasattr(spans[0], "get_x") else np.asarray(spans[0].get_xy())[:, 0].min()
        w = spans[0].get_width() if hasattr(spans[0], "get_width") else np.ptp(np.asarray(spans[0].get_xy())[:, 0])
        assert x0 == pytest.approx(a) and x0 + w == pytest.approx(b)
    # the lower panel shows the factor of safety with the criterion
    lower = fig.axes[1]
    assert any(np.allclose(ln.get_ydata(), 1.5) for ln in lower.lines if len(ln.get_ydata()) == 2)


def test_figures_write_png_and_svg(tmp_path):
    r = seepfe.solve(sheet_pile(order=1, size=1.5))
    names = []
    for item in plot.figure_set(r, show_mesh=True, arrows=True):
        paths = plot.save_figure(item.fig, tmp_path / item.name)
        names.append(item.name)
        png, svg = paths
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert b"<svg" in svg.read_bytes()[:400]
    assert {"section", "mesh", "total_head", "pore_pressure", "flownet", "velocity"} <= set(names)


def test_large_mesh_plots_without_element_loops():
    # a mesh of over 100k P1 triangles: every layer is one vectorised tri call (time is measured by
    # scripts, not here; this only checks that a big mesh goes through and contours correctly)
    sec = sheet_pile(order=1, size=0.12)
    sec["mesh"]["refine"] = []
    r = seepfe.solve(sec)
    assert r.mesh.n_elements > 100_000
    fig = plot.field_figure(r, "total_head")
    assert len(fig.seepfe_contours["lines"].levels) >= 5
