"""Transient seepage under a hydrograph (issue 14), checked against the outside.

* a step rise on a confined aquifer: h(x, t) = dH erfc(x / (2 sqrt(T t / S))), Carslaw and Jaeger (1959),
  Conduction of Heat in Solids, 2nd ed., section 2.4 (semi-infinite solid, surface held at a constant value);
* a sinusoidal stage on a confined aquifer: amplitude decay exp(-x sqrt(w S / 2T)) and time lag
  x sqrt(S / (2 w T)), Ferris (1951), Cyclic fluctuations of water level as a basis for determining aquifer
  transmissibility, IASH Publ. 33, 148-155;
* infiltration into a dry column, the test problem of Celia, Bouloutas and Zarba (1990), Water Resour. Res. 26(7),
  1483-1496 (parameters from memory), against an independent method-of-lines solution of the same equation
  (finite volumes in the pressure head, scipy's BDF integrator);
* a hydrograph held constant long enough gives the steady solution (heads and flows);
* the global water balance (storage change against the boundary flows) closes at every step.
"""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import numpy as np
import pytest
from scipy.special import erfc

import seepfe
from seepfe.hydrograph import section_at
from seepfe.transient import solve_transient

# ------------------------------------------------------------------------------------------- confined aquifer
L_AQ, B_AQ, K_AQ, SS_AQ = 3000.0, 10.0, 1e-4, 1e-4          # m, m, m/s, 1/m: T = 1e-3 m2/s, S = 1e-3


def _aquifer(hydrograph, output, max_step, first_step=None, size=10.0):
    """A confined strip 3000 m long and 10 m thick (phreatic off: the idealised aquifer of the closed forms)."""
    return {"title": "confined strip", "materials": {"a": {"k": K_AQ, "specific_storage": SS_AQ}},
            "zones": [{"name": "aq", "material": "a", "polygon": [[0, -B_AQ], [L_AQ, -B_AQ], [L_AQ, 0], [0, 0]]}],
            "boundaries": [{"name": "river", "polyline": [[0, -B_AQ], [0, 0]], "hydrograph": hydrograph,
                            "time_unit": "hour", "output_times": output},
                           {"name": "far", "polyline": [[L_AQ, -B_AQ], [L_AQ, 0]], "head": 0.0}],
            "solver": {"phreatic": "off"},
            "transient": {"max_step": max_step, "first_step": first_step or max_step / 60},
            "mesh": {"size": size, "order": 2, "refine": [{"point": [0, 0], "size": size / 5, "width": 40}]}}


def test_step_rise_on_a_confined_aquifer_follows_carslaw_and_jaeger():
    # Carslaw and Jaeger (1959) section 2.4: h = dH erfc(x / (2 sqrt(D t))), D = T / S; inflow dH T / sqrt(pi D t)
    res = solve_transient(seepfe.load_section(_aquifer([[0, 0], [0, 1.0], [24, 1.0]], [1, 6, 24], 0.06)),
                          history=False)
    T, S = K_AQ * B_AQ, SS_AQ * B_AQ
    x = np.linspace(0, 600, 61)
    for hours, tol_h, tol_q in ((1, 0.01, 0.03), (6, 0.002, 0.006), (24, 0.0006, 0.002)):
        t = hours * 3600.0
        r = res.at(t)
        h = r.head(np.c_[x, np.full_like(x, -B_AQ / 2)])
        exact = erfc(x / (2 * np.sqrt(T * t / S)))
        assert np.abs(h - exact).max() < tol_h, hours            # measured 7.6e-3, 1.4e-3, 3.4e-4 (of dH = 1 m)
        q = r.boundary_flow("river")
        assert abs(q / (T / np.sqrt(np.pi * T / S * t)) - 1) < tol_q, hours    # measured 2.1 %, 0.37 %, 0.09 %
    # backward Euler is first order: four times smaller steps cut the error about four times
    coarse = solve_transient(seepfe.load_section(_aquifer([[0, 0], [0, 1.0], [24, 1.0]], [24], 0.24)),
                             history=False)
    t = 24 * 3600.0
    e_fine = np.abs(res.at(t).head(np.c_[x, np.full_like(x, -5)]) - erfc(x / (2 * np.sqrt(T * t / S)))).max()
    e_coarse = np.abs(coarse.at(t).head(np.c_[x, np.full_like(x, -5)]) - erfc(x / (2 * np.sqrt(T * t / S)))).max()
    assert 3.0 < e_coarse / e_fine < 5.0


def test_confined_run_reuses_one_factorisation_per_distinct_step():
    res = solve_transient(seepfe.load_section(_aquifer([[0, 0], [0, 1.0], [24, 1.0]], [24], 0.24)), history=False)
    info = res.solver_info
    assert info["linear_steps"] >= info["steps"] > 50
    # the matrix K + M Ss / dt changes only with dt (the prescribed set is fixed here): one LDL^T per distinct dt
    assert info["factorizations_linear"] == info["distinct_linear_keys"] < 15
    assert info["newton_iterations"] <= info["steps"] + 2     # linear: one solve a step, the next residual ~1e-15


@pytest.mark.slow
def test_sinusoidal_stage_decays_and_lags_as_ferris():
    # Ferris (1951): amplitude A exp(-x a), lag x / (w / a) with a = sqrt(w S / 2T)
    P = 12.0                                                   # h
    cycles, per = 6, 48
    tt = np.linspace(0, cycles * P, cycles * per + 1)
    hyd = [[float(t), float(np.sin(2 * np.pi * t / P))] for t in tt]
    outs = [float(t) for t in np.linspace((cycles - 1) * P, cycles * P, 25)]
    res = solve_transient(seepfe.load_section(_aquifer(hyd, outs, P / 192, P / 192, size=5.0)), history=False)
    T, S = K_AQ * B_AQ, SS_AQ * B_AQ
    w = 2 * np.pi / (P * 3600)
    xs = np.array([50.0, 100.0, 200.0])
    ts = np.array(outs[:-1]) * 3600
    H = np.array([res.at(t).head(np.c_[xs, np.full_like(xs, -5.0)]) for t in ts])
    M = np.c_[np.ones_like(ts), np.sin(w * ts), np.cos(w * ts)]
    c = np.linalg.lstsq(M, H, rcond=None)[0]
    amp, lag = np.hypot(c[1], c[2]), np.arctan2(-c[2], c[1]) / w
    a = np.sqrt(w * S / (2 * T))
    assert np.all(np.abs(amp / np.exp(-xs * a) - 1) < [0.01, 0.015, 0.025])     # measured 0.5 %, 0.8 %, 1.5 %
    assert np.all(np.abs(lag / (xs * np.sqrt(S / (2 * w * T))) - 1) < 0.015)   # measured 0.8 % to 0.9 %


# ------------------------------------------------------------------------------------------- unsaturated column
def _celia_reference(n=200, hours=(6, 12, 24)):
    """Celia et al. (1990) column by the method of lines: cell-centred finite volumes in the pressure head psi
    (arithmetic mean k between cells), C(psi) dpsi/dt = -dq/dz, scipy's BDF. Returns (z of cells, {h: psi})."""
    from scipy.integrate import solve_ivp
    from scipy.sparse import diags
    ts_, tr_, a_, n_, ks = 0.368, 0.102, 3.35, 2.0, 9.22e-5
    m_ = 1 - 1 / n_
    dz = 1.0 / n
    zc = (np.arange(n) + 0.5) * dz

    def se(p):
        return np.where(p < 0, (1 + (a_ * np.abs(p)) ** n_) ** (-m_), 1.0)

    def k(p):
        s = se(p)
        return ks * np.sqrt(s) * (1 - (1 - s ** (1 / m_)) ** m_) ** 2

    def cap(p):
        u = np.abs(p)
        return (ts_ - tr_) * m_ * n_ * a_ ** n_ * u ** (n_ - 1) * (1 + (a_ * u) ** n_) ** (-m_ - 1)
    top, bottom = -0.75, -10.0

    def rhs(t, p):
        kc = k(p)
        q = -0.5 * (kc[1:] + kc[:-1]) * ((p[1:] - p[:-1]) / dz + 1.0)
        qt = -0.5 * (kc[-1] + k(np.array([top]))[0]) * ((top - p[-1]) / (dz / 2) + 1.0)
        qb = -0.5 * (kc[0] + k(np.array([bottom]))[0]) * ((p[0] - bottom) / (dz / 2) + 1.0)
        qf = np.concatenate([[qb], q, [qt]])
        return -(qf[1:] - qf[:-1]) / dz / cap(p)
    sol = solve_ivp(rhs, (0, max(hours) * 3600.0), np.full(n, -10.0), method="BDF",
                    t_eval=[h * 3600.0 for h in hours], rtol=1e-7, atol=1e-9,
                    jac_sparsity=diags([1.0, 1.0, 1.0], [-1, 0, 1], shape=(n, n)))
    assert sol.success
    theta = tr_ + (ts_ - tr_) * se(sol.y)
    infil = ((theta - (tr_ + (ts_ - tr_) * se(np.array(-10.0)))) * dz).sum(axis=0)
    return zc, {h: sol.y[:, i] for i, h in enumerate(hours)}, dict(zip(hours, infil))


def _front(z, psi, level=-5.0):
    """Depth below the top (z = 1 m) where psi rises through ``level`` (the wetting front), m."""
    i = np.flatnonzero((psi[:-1] < level) & (psi[1:] >= level))[-1]
    return 1.0 - (z[i] + (level - psi[i]) / (psi[i + 1] - psi[i]) * (z[i + 1] - z[i]))


@pytest.mark.slow
def test_infiltration_column_of_celia_bouloutas_and_zarba():
    # the problem (from memory): 1 m column, theta_s 0.368, theta_r 0.102, alpha 3.35 1/m, n 2, Ks 9.22e-5 m/s;
    # psi = -10 m at the start and at the bottom, psi = -0.75 m at the top; we compare the wetting front (psi = -5 m)
    # and the infiltrated water with the method-of-lines solution, not with the paper's figures
    d = {"title": "Celia column", "materials": {"s": {"k": 9.22e-5, "specific_storage": 1e-6, "unsaturated": {
            "alpha": 3.35, "n": 2.0, "kr_min": 1e-12, "theta_s": 0.368, "theta_r": 0.102}}},
         "zones": [{"name": "col", "material": "s", "polygon": [[0, 0], [0.02, 0], [0.02, 1.0], [0, 1.0]]}],
         "boundaries": [{"name": "top", "polyline": [[0, 1.0], [0.02, 1.0]], "hydrograph": [[0, 0.25], [24, 0.25]],
                         "time_unit": "hour", "output_times": [6, 12, 24]},
                        {"name": "bottom", "polyline": [[0, 0], [0.02, 0]], "head": -10.0}],
         "solver": {"phreatic": "off"}, "transient": {"max_step": 0.25, "first_step": 0.0025},
         "mesh": {"size": 0.01, "order": 1}}
    sec = seepfe.load_section(d)
    # the water-level checks of load_section are for levees (a head below its own boundary is refused there);
    # this idealised column is loaded confined and then solved saturated-unsaturated
    sec = dataclasses.replace(sec, spec=sec.spec.model_copy(update={
        "solver": sec.spec.solver.model_copy(update={"phreatic": "auto"})}))
    res = solve_transient(sec, history=False, initial_head=lambda p: p[:, 1] - 10.0)
    zc, ref, infil = _celia_reference()
    z = np.linspace(0, 1, 201)
    width = 0.02
    for h in (6, 12, 24):
        r = res.at(h * 3600.0)
        psi = r.head(np.c_[np.full_like(z, width / 2), z]) - z
        f_fe, f_ref = _front(z, psi), _front(zc, ref[h])
        assert abs(f_fe - f_ref) < 0.005, h                    # measured 0.4 to 1.1 mm (fronts 0.25, 0.37, 0.56 m)
    vol = res.volumes()["top"] / width                          # m3 per m2 of column
    assert abs(vol / infil[24] - 1) < 0.02                      # measured -0.9 %
    assert res.balance["largest_step_error"] < 1e-6 and res.balance["run_error"] < 1e-8


# ------------------------------------------------------------------------------------------- steady limit, balance
def _sand_levee(hydrograph=((0, 2.0), (0, 5.0), (100, 5.0)), size=1.5):
    return {"title": "sand levee, stage held", "materials": {"fill": {"description": "silty sand fill", "k": 1e-4,
                                                                      "unit_weight": 19.0}},
            "zones": [{"name": "embankment", "material": "fill", "polygon": [[0, 0], [40, 0], [25, 6], [15, 6]]}],
            "boundaries": [{"name": "river", "polyline": [[0, 0], [15, 6]], "hydrograph": [list(p) for p in hydrograph],
                            "time_unit": "day", "dry_above_level": True},
                           {"name": "landside", "polyline": [[25, 6], [40, 0]], "seepage_face": True}],
            "mesh": {"size": size, "order": 1}}


def test_stage_held_long_enough_gives_the_steady_solution_and_the_balance_closes():
    sec = seepfe.load_section(_sand_levee())
    mesh = seepfe.make_mesh(sec)
    res = solve_transient(sec, mesh=mesh)
    t = 100 * 86400.0
    steady = seepfe.solve(section_at(sec, t), mesh=mesh)
    r = res.at(t)
    assert np.abs(r.h - steady.h).max() < 1e-6                   # measured 6e-11 m
    for b in ("river", "landside"):
        assert abs(r.boundary_flow(b) / steady.boundary_flow(b) - 1) < 1e-6
    assert abs(r.balance["storage_rate_m3_s_per_m"]) < 1e-7 * abs(steady.boundary_flow("river"))
    # the checks of the last moment are the steady ones (the analysis layer on both)
    assert seepfe.analyse(r).governing["fs"] == pytest.approx(seepfe.analyse(steady).governing["fs"], rel=1e-6)
    # the water balance: storage change = net boundary inflow, at every step and over the run
    H = res.history
    assert H["balance_error"].max() < 1e-6                       # measured 6e-8
    assert res.balance["run_error"] < 1e-7                      # measured 1.3e-8
    dS = np.diff(H["storage_m3_per_m"])
    net = (H["flow_river_m3_s_per_m"] + H["flow_landside_m3_s_per_m"])[1:] * H["dt_s"][1:]
    assert np.abs(dS - net).max() <= 1e-6 * np.abs(dS).max()
    assert H["storage_m3_per_m"][-1] > 5.0                       # the embankment took up water (m3 per m)


def _blanket_levee(hydrograph, size=6.0):
    """The example levee of sections/levee_flood.json on a coarse P1 mesh, with another hydrograph."""
    d = json.loads((Path(__file__).parent.parent / "sections" / "levee_flood.json").read_text())
    d["boundaries"][0]["hydrograph"] = [list(p) for p in hydrograph]
    d["boundaries"][0].pop("output_times", None)
    d["mesh"] = {"size": size, "order": 1, "refine": [{"polyline": [[-20, 0], [20, 0], [60, 0]], "size": 1.5}]}
    return d


def test_transient_heads_never_pass_the_steady_ones_so_the_fs_is_never_below_the_steady_bound():
    # unsafe side, by the comparison principle of the diffusion equation (common practice): under a stage that
    # rises and then holds, heads rise towards the steady field at that stage and never pass it, so the uplift
    # and heave FS of the top stratum (from the head under it) approach the steady FS from above. A transient FS
    # below the steady one would be a code fault (a sign of the storage, a flow counted twice), one above it at the
    # end a missed approach; both are checked.
    sec = seepfe.load_section(_blanket_levee([[0, 1.0], [1, 5.0], [2000, 5.0]]))
    mesh = seepfe.make_mesh(sec)
    res = solve_transient(sec, mesh=mesh)
    st = seepfe.solve(section_at(sec, 2000 * 86400.0), mesh=mesh)
    fs_steady = seepfe.analyse(st).governing["fs"]
    toe_steady = float(st.head(np.array([res.toe_point]))[0])
    H = res.history
    assert np.all(H["toe_head_m"] <= toe_steady + 1e-6)
    assert np.all(np.diff(H["toe_head_m"]) >= -1e-6)            # rises, never falls, under a rising stage
    fs = H["fs"][np.isfinite(H["fs"])]
    assert np.all(fs >= fs_steady * (1 - 1e-6))
    assert res.least_fs["fs"] == pytest.approx(fs_steady, rel=1e-3)
    assert H["fs"][-1] == pytest.approx(fs_steady, rel=1e-3)


def test_rapid_drawdown_leaves_water_in_the_riverside_slope(tmp_path):
    # at the end of a fast fall the riverside fill is still wet above the river level (common practice: the
    # reason rapid drawdown governs riverside slope stability); the steady field at the same stage is drier.
    # The pore pressures written for a stability analysis are those of the transient field.
    d = _blanket_levee([[0, 1.0], [4, 5.0], [10, 5.0], [11, 1.2], [13, 1.2]])
    sec = seepfe.load_section(d)
    mesh = seepfe.make_mesh(sec)
    res = solve_transient(sec, mesh=mesh, history=False)
    t = 11 * 86400.0
    assert t in res.schedule.drawdown_ends and np.isclose(res.times, t).any()
    p = np.array([[-10.0, 2.0]])                                # in the riverside fill, above the river (1.2 m)
    transient = float(res.at(t).head(p)[0]) - 2.0
    steady = float(seepfe.solve(section_at(sec, t), mesh=mesh).head(p)[0]) - 2.0
    assert transient > 0.5 and steady < 0.0                     # pressure head, m: measured +1.04 and -1.08
    from seepfe.transient_output import pore_pressure_grid
    g = pore_pressure_grid(res, t)
    k = np.argmin(np.hypot(g["x_m"] - p[0, 0], g["y_m"] - p[0, 1]))
    assert abs(g["pressure_head_m"][k] - float(res.at(t).head(np.c_[g["x_m"][k], g["y_m"][k]])[0] - g["y_m"][k])) < 1e-9
    assert np.allclose(g["pore_pressure_kPa"], sec.gamma_w * g["pressure_head_m"])


def _column(size=0.05, hours=6, max_step=0.5):
    d = {"title": "dry column", "materials": {"s": {"k": 9.22e-5, "specific_storage": 1e-6, "unsaturated": {
            "alpha": 3.35, "n": 2.0, "kr_min": 1e-12, "theta_s": 0.368, "theta_r": 0.102}}},
         "zones": [{"name": "col", "material": "s", "polygon": [[0, 0], [size, 0], [size, 1.0], [0, 1.0]]}],
         "boundaries": [{"name": "top", "polyline": [[0, 1.0], [size, 1.0]],
                         "hydrograph": [[0, 0.25], [hours, 0.25]], "time_unit": "hour"},
                        {"name": "bottom", "polyline": [[0, 0], [size, 0]], "head": -10.0}],
         "solver": {"phreatic": "off"}, "transient": {"max_step": max_step, "first_step": max_step / 100},
         "mesh": {"size": size, "order": 1}}
    sec = seepfe.load_section(d)
    return dataclasses.replace(sec, spec=sec.spec.model_copy(update={
        "solver": sec.spec.solver.model_copy(update={"phreatic": "auto"})}))


def test_water_balance_is_measured_not_assumed(monkeypatch):
    # the mixed form closes the balance; the head form of Richards' equation, C(psi^{n+1}) (psi^{n+1} - psi^n) / dt in
    # place of the change of stored water, does not (Celia, Bouloutas and Zarba 1990, the reason for the mixed form):
    # put in on purpose, the measured balance goes red
    import seepfe.transient as tr
    res = solve_transient(_column(hours=1), history=False, initial_head=lambda p: p[:, 1] - 10.0)
    assert res.balance["largest_step_error"] < 1e-6 and res.balance["run_error"] < 1e-8
    orig_step, orig_eval = tr._Stepper.step, tr._Stepper._eval

    def step(self, h_old, S_old, bc, face, dt, guess=None):
        self._h_old = h_old
        return orig_step(self, h_old, S_old, bc, face, dt, guess)

    def head_form(self, h, S_old, dt, load, derivative=True):
        kr_e, dkr, A, S, C, r = orig_eval(self, h, S_old, dt, load, derivative)
        return kr_e, dkr, A, S, C, r - (S - S_old) / dt + C * (h - self._h_old) / dt
    monkeypatch.setattr(tr._Stepper, "step", step)
    monkeypatch.setattr(tr._Stepper, "_eval", head_form)
    bad = solve_transient(_column(hours=1), history=False, initial_head=lambda p: p[:, 1] - 10.0)
    assert bad.balance["run_error"] > 1e-3
