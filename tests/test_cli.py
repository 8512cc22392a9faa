"""The CLI in-process: check and solve write what they promise, and never a half-written folder."""

import json
from pathlib import Path

import meshio
import numpy as np

from seepfe.cli import main

DEMO = Path(__file__).parent.parent / "sections" / "levee_blanket.json"


def test_check_prints_mesh_statistics(capsys):
    assert main(["check", str(DEMO), "--order", "1"]) == 0
    out = capsys.readouterr().out
    assert "valid" in out and "min angle (deg)" in out and "worst quality" in out


def test_solve_writes_summary_tables_and_vtu(tmp_path, capsys):
    out = tmp_path / "levee"
    assert main(["solve", str(DEMO), "--out", str(out), "--order", "1"]) == 0
    text = capsys.readouterr().out
    assert "licensed engineer" in text
    s = json.loads((out / "summary.json").read_text())
    assert set(s["flows_m3_s_per_m"]) == {"river", "landside"}
    assert s["balance"]["relative_error"] < 1e-8
    assert len(s["input_sha256"]) == 64 and s["seepfe_version"]
    nodes = np.genfromtxt(out / "nodes.csv", delimiter=",", names=True)
    assert {"x_m", "y_m", "total_head_m", "pressure_head_m", "pore_pressure_kPa"} <= set(nodes.dtype.names)
    assert len(nodes) == s["mesh"]["nodes"]
    m = meshio.read(out / "result.vtu")
    assert np.allclose(m.point_data["total_head_m"], nodes["total_head_m"])
    # a second run replaces the folder whole; no temporary folders are left beside it
    assert main(["solve", str(DEMO), "--out", str(out), "--order", "1"]) == 0
    assert sorted(p.name for p in tmp_path.iterdir()) == ["levee"]


def test_solve_refuses_a_foreign_folder(tmp_path, capsys):
    foreign = tmp_path / "mine"
    foreign.mkdir()
    (foreign / "notes.txt").write_text("keep me")
    assert main(["solve", str(DEMO), "--out", str(foreign), "--order", "1"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("seepfe: error:")
    assert (foreign / "notes.txt").read_text() == "keep me"


def test_a_missing_gmsh_library_is_one_line_naming_the_packages(monkeypatch, capsys):
    import importlib.abc
    import re
    import sys

    from seepfe.mesh import GMSH_SYSTEM_PACKAGES

    class NoGLU(importlib.abc.MetaPathFinder):
        def find_spec(self, name, path=None, target=None):
            if name == "gmsh":
                raise OSError("libGLU.so.1: cannot open shared object file: No such file or directory")
            return None

    monkeypatch.delitem(sys.modules, "gmsh", raising=False)
    monkeypatch.setattr(sys, "meta_path", [NoGLU()] + sys.meta_path)
    assert main(["check", str(DEMO), "--order", "1"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "libGLU.so.1" in err[0] and "libglu1-mesa" in err[0]
    # the same packages as scripts/install.sh installs
    sh = (DEMO.parent.parent / "scripts" / "install.sh").read_text()
    assert re.search(r'GMSH_LIBS="([^"]+)"', sh).group(1).split() == GMSH_SYSTEM_PACKAGES.split()


def test_python_m_seepfe_runs_the_command_line():
    import subprocess
    import sys
    root = DEMO.parent.parent
    p = subprocess.run([sys.executable, "-m", "seepfe", "--version"], capture_output=True, text=True, cwd=root)
    assert p.returncode == 0 and p.stdout.startswith("seepfe ")
