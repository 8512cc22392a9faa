"""Sweeps, target search, fragility, resuming and the Dask path, on an invented 1D column.

The column: a clay blanket (thickness tb, k_b) over sand (thickness ts, k_s), a river head H at the
base and a seepage face on top.  Upward flow through two layers in series (Darcy; exact for 1D flow,
e.g. Harr, M.E. (1962), Groundwater and Seepage, ch. 1) gives the gradient across the blanket
    i_b = H / (tb + ts * k_b / k_s),
and the factor of safety against heave is FS = i_c / i_b with Terzaghi's critical gradient
i_c = (gamma_sat - gamma_w) / gamma_w (Terzaghi, K. (1943), Theoretical Soil Mechanics, ch. XII).
Quadratic elements reproduce this linear-per-layer head field exactly.
"""

import json
import math
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
from scipy import stats

import seepfe
from seepfe.errors import SectionError
from seepfe.sweep import run_sweep
from seepfe.sweep.fragility import binomial_interval

TB, TS, KS, KB, GB, GW = 2.0, 8.0, 1e-4, 1e-6, 18.5, 9.81
IC = (GB - GW) / GW


def column(H=2.0, ks=KS, kb=KB):
    return {"title": "invented column: clay blanket over sand",
            "materials": {"sand": {"k": ks, "unit_weight": 20.0}, "blanket": {"k": kb, "unit_weight": GB}},
            "zones": [{"name": "sand", "material": "sand", "polygon": [[0, -10], [2, -10], [2, -2], [0, -2]]},
                      {"name": "blanket", "material": "blanket", "polygon": [[0, -2], [2, -2], [2, 0], [0, 0]]}],
            "boundaries": [{"name": "base", "polyline": [[0, -10], [2, -10]], "head": H},
                           {"name": "surface", "polyline": [[0, 0], [2, 0]], "seepage_face": True}],
            "mesh": {"size": 1.0}}


def fs_exact(H, ks=KS, kb=KB):
    """Series flow (Darcy) and Terzaghi's critical gradient; see the module docstring."""
    return IC / (H / (TB + TS * kb / ks))


def stage_at(fs, ks=KS, kb=KB):
    """River head at which FS equals fs (the inverse of fs_exact)."""
    return IC / fs * (TB + TS * kb / ks)


def _fs_direct(section):
    return seepfe.analyse(seepfe.solve(section), ["surface"]).governing["fs"]


# --------------------------------------------------------------------------- table
def test_table_columns_units_and_values_against_series_flow(tmp_path):
    sweep = {"vary": {"boundaries.base.head": [1.0, 2.0, 3.0], "materials.sand.k": [5e-5, 1e-4]},
             "points": {"blanket_base": [1.0, -2.0]}, "criterion": {"fs": 1.5}}
    rep = run_sweep(column(), sweep, out=tmp_path / "s", workers=1)
    assert rep.complete and len(rep.table) == 5 and rep.solved == 4     # the base k case repeats: solved once
    hdr = (tmp_path / "s" / "results" / "table.csv").read_text().splitlines()[0].split(",")
    for col in ("boundaries.base.head_m", "materials.sand.k_m_s", "flow_base_m3_s_per_m", "head_blanket_base_m",
                "exit_gradient_max", "fs", "fs_x_m", "fs_mode", "verdict", "why"):
        assert col in hdr
    for r in rep.table:
        H, ks = r["boundaries.base.head_m"], r["materials.sand.k_m_s"]
        q = KB * H / (TB + TS * KB / ks) * 2.0                              # series flow, 2 m wide
        assert r["flow_base_m3_s_per_m"] == pytest.approx(q, rel=1e-6)
        assert r["head_blanket_base_m"] == pytest.approx(H * TB / (TB + TS * KB / ks), rel=1e-6)
        assert r["fs"] == pytest.approx(fs_exact(H, ks), rel=1e-4)
        assert r["verdict"] == ("pass" if fs_exact(H, ks) >= 1.5 else "fail")
    files = set(os.listdir(tmp_path / "s" / "results"))
    assert {"table.csv", "sweep.json", "vs_boundaries.base.head.png", "vs_materials.sand.k.svg"} <= files


def test_bad_sweep_key_is_one_line_error(tmp_path):
    with pytest.raises(SectionError) as e:
        run_sweep(column(), {"vary": {"boundaries.bse.head": [1.0]}}, out=None, workers=1)
    msg = str(e.value)
    assert "\n" not in msg and "bse" in msg and "base" in msg


# --------------------------------------------------------------------------- target search
@pytest.mark.parametrize("tol", [0.02])
def test_target_stage_of_first_failure(tmp_path, tol):
    sweep = {"targets": [{"name": "stage", "parameter": "boundaries.base.head", "range": [0.5, 4.0],
                          "find": "largest", "quantity": "fs_min", "at_least": 1.5, "tolerance": tol}]}
    rep = run_sweep(column(), sweep, out=tmp_path / "t", workers=1)
    t = rep.targets[0]
    assert t["status"] == "found"
    a, b = t["bracket"]
    assert b - a <= tol + 1e-12
    assert abs(t["value"] - stage_at(1.5)) <= tol                          # against the closed form
    assert _fs_direct(column(H=t["value"])) >= 1.5                         # a direct solve meets it
    assert _fs_direct(column(H=t["other_end"])) < 1.5                      # and the other end fails


def test_target_smallest_blanket_conductivity(tmp_path):
    H, tol = 1.5, 2e-8
    sweep = {"targets": [{"name": "kb", "parameter": "materials.blanket.k", "range": [1e-7, 1e-5],
                          "find": "smallest", "at_least": 1.5, "tolerance": tol}]}
    t = run_sweep(column(H=H), sweep, workers=1).targets[0]
    kb_exact = KS * (1.5 * H / IC - TB) / TS                               # inverse of fs_exact in k_b
    assert t["status"] == "found" and abs(t["value"] - kb_exact) <= tol
    d = column(H=H)
    d["materials"]["blanket"]["k"] = t["value"]
    assert _fs_direct(d) >= 1.5


# --------------------------------------------------------------------------- fragility
def _frag(cov, samples, stages, sampling="latin_hypercube"):
    return {"fragility": {"stage": "boundaries.base.head", "stages": {"values": stages},
                          "conductivity": {"blanket": {"cov": cov}}, "samples": samples, "sampling": sampling,
                          "seed": 3, "criterion": 1.5, "interval": "wilson"}}


def test_fragility_zero_cov_is_a_step_at_the_deterministic_stage():
    h1, h15 = stage_at(1.0), stage_at(1.5)
    # 1 % either side of the closed-form stages: the FE is exact here (P2, linear heads per layer), and
    # a head field a few per cent off (e.g. a constant head, whose uplift FS is 4 % low) steps elsewhere
    stages = sorted([h15 * 0.99, h15 * 1.01, h1 * 0.99, h1 * 1.01])
    rep = run_sweep(column(), _frag(0.0, 8, stages), workers=1)
    assert rep.solved == len(stages)                       # identical realisations are solved once
    p1 = [p["p_fs_below_1"] for p in rep.fragility["probabilities"]]
    p15 = [p["p_fs_below_criterion"] for p in rep.fragility["probabilities"]]
    assert p1 == [0.0, 0.0, 0.0, 1.0] and p15 == [0.0, 1.0, 1.0, 1.0]


@pytest.mark.slow
def test_fragility_sampling_agrees_with_realisations_and_lognormal():
    stages = [1.8, 1.87, 1.95]
    cov, n = 0.8, 24
    rep = run_sweep(column(), _frag(cov, n, stages), workers=1)
    fr = rep.fragility
    kb = np.asarray(fr["k_m_s"])[:, 0]
    sigma = math.sqrt(math.log1p(cov ** 2))
    for j, H in enumerate(stages):
        p = fr["probabilities"][j]
        # the deterministic fraction of these realisations (closed form per realisation)
        k_det = int(sum(fs_exact(H, kb=k) < 1.0 for k in kb))
        assert p["n_fs_below_1"] == k_det
        # the exact lognormal probability lies in the band: FS < 1 <=> k_b < k_s (H / i_c - tb) / ts
        thr = KS * (H / IC - TB) / TS
        p_exact = stats.norm.cdf((math.log(thr) - math.log(KB)) / sigma)
        assert p["p_fs_below_1_low"] <= p_exact <= p["p_fs_below_1_high"]
        assert 0 < p["p_fs_below_1"] < 1                       # not a trivial stage
        assert p["p_fs_below_criterion"] >= p["p_fs_below_1"]


def test_binomial_intervals_against_published_values():
    # Wilson (1927) score interval, 95 %, k = 0 of n = 10: [0, 0.2775] (Newcombe, R.G. (1998),
    # Stat. Med. 17:857-872, table I, from memory); Clopper-Pearson k = 0, n = 10: upper 1 - 0.025^(1/10).
    lo, hi = binomial_interval(0, 10, 0.95, "wilson")
    assert lo == 0.0 and hi == pytest.approx(0.2775, abs=5e-4)
    lo, hi = binomial_interval(0, 10, 0.95, "clopper_pearson")
    assert hi == pytest.approx(1 - 0.025 ** 0.1, rel=1e-9)
    lo, hi = binomial_interval(5, 10, 0.95, "wilson")
    assert lo == pytest.approx(1 - hi, abs=1e-12) and lo == pytest.approx(0.2366, abs=5e-4)


# --------------------------------------------------------------------------- resuming
SWEEP6 = {"vary": {"boundaries.base.head": {"from": 0.5, "to": 3.0, "count": 6}}}


@pytest.mark.slow
def test_interrupted_sweep_resumes_and_solves_only_the_missing_cases(tmp_path):
    ref = run_sweep(column(), SWEEP6, out=tmp_path / "ref", workers=1)
    out = tmp_path / "s"
    part = run_sweep(column(), SWEEP6, out=out, workers=1, max_solves=2)
    assert not part.complete and part.solved == 2
    assert not (out / "results").exists()                       # no half-written results
    assert len(list((out / "cases").glob("*.json"))) == 2
    rest = run_sweep(column(), SWEEP6, out=out, workers=1)
    assert rest.complete and rest.solved == 4 and rest.cached == 2
    assert (out / "results" / "table.csv").read_text() == (tmp_path / "ref" / "results" / "table.csv").read_text()
    assert [r["fs"] for r in rest.table] == pytest.approx([fs_exact(h) for h in np.linspace(0.5, 3.0, 6)], rel=1e-4)
    again = run_sweep(column(), SWEEP6, out=out, workers=1)
    assert again.solved == 0
    # a changed value re-solves only what changed
    sw = json.loads(json.dumps(SWEEP6))
    sw["vary"]["boundaries.base.head"] = {"values": [0.5, 1.0, 1.7]}
    assert run_sweep(column(), sw, out=out, workers=1).solved == 1


@pytest.mark.slow
def test_killed_subprocess_then_rerun(tmp_path):
    sec, sw, out = tmp_path / "col.json", tmp_path / "sw.json", tmp_path / "k"
    sec.write_text(json.dumps(column()))
    sw.write_text(json.dumps({"vary": {"boundaries.base.head": {"from": 0.5, "to": 4.0, "count": 40}}}))
    cmd = [sys.executable, "-c", "import sys; from seepfe.cli import main; sys.exit(main(sys.argv[1:]))",
           "sweep", str(sec), str(sw), "--out", str(out), "--workers", "1", "--no-plots"]
    p = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    t0 = time.time()
    while time.time() - t0 < 60 and len(list((out / "cases").glob("*.json"))) < 3 and p.poll() is None:
        time.sleep(0.02)
    p.send_signal(signal.SIGKILL)
    p.wait()
    done = len(list((out / "cases").glob("*.json")))
    assert 3 <= done < 40 and not (out / "results").exists()
    rep = run_sweep(sec, sw, out=out, workers=1, plots=False)
    assert rep.complete and rep.solved == 40 - done and rep.cached == done
    assert [r["boundaries.base.head_m"] for r in rep.table] == pytest.approx(np.linspace(0.5, 4.0, 40))
    assert [r["fs"] for r in rep.table] == pytest.approx([fs_exact(h) for h in np.linspace(0.5, 4.0, 40)],
                                                            rel=1e-4)


# --------------------------------------------------------------------------- Dask
@pytest.mark.slow
def test_dask_local_cluster_gives_the_same_table_as_the_local_pool(tmp_path):
    distributed = pytest.importorskip("distributed")
    sweep = {"vary": {"boundaries.base.head": [1.0, 2.5], "materials.blanket.k": [5e-7, 2e-6]}, "mode": "grid"}
    local = run_sweep(column(), sweep, out=tmp_path / "local", workers=2, plots=False)
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cl, distributed.Client(cl) as client:
        remote = run_sweep(column(), sweep, out=tmp_path / "dask", scheduler=client, plots=False)
    assert remote.backend == "dask" and remote.solved == 4
    for r in remote.table:                                   # the series-flow closed form (module docstring)
        kb = r["materials.blanket.k_m_s"]
        assert r["fs"] == pytest.approx(fs_exact(r["boundaries.base.head_m"], kb=kb), rel=1e-4)
    assert (tmp_path / "dask" / "results" / "table.csv").read_text() == \
        (tmp_path / "local" / "results" / "table.csv").read_text()
