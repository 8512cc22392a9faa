"""The CLI in-process: check and solve write what they promise, and never a half-written folder."""

import json
import subprocess
import sys
from pathlib import Path

import meshio
import numpy as np
import pytest

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


def test_every_subcommand_has_a_description_examples_and_exit_codes(capsys):
    import pytest

    from seepfe.cli import SUBCOMMANDS
    for name in SUBCOMMANDS:
        with pytest.raises(SystemExit) as e:
            main([name, "--help"])
        assert e.value.code == 0
        out = capsys.readouterr().out
        assert "examples:" in out and "exit codes:" in out and "  4    a sweep stopped early" in out, name
    solving = {"solve", "plot", "report", "sweep"}
    for name in solving:
        main_help = _help(name, capsys)
        assert "--size" in main_help and "--order" in main_help and "--linear" in main_help, name


def _help(name, capsys):
    import pytest
    with pytest.raises(SystemExit):
        main([name, "--help"])
    return capsys.readouterr().out


def test_quiet_prints_nothing_but_errors_and_verbose_logs_stages_to_stderr(tmp_path, capsys):
    assert main(["-q", "solve", str(DEMO), "--out", str(tmp_path / "q"), "--order", "1", "--size", "10"]) == 0
    cap = capsys.readouterr()
    assert cap.out == "" and cap.err == ""
    assert (tmp_path / "q" / "summary.json").exists()
    assert main(["-q", "solve", str(DEMO) + ".missing", "--out", str(tmp_path / "x")]) == 2
    cap = capsys.readouterr()
    assert cap.out == "" and cap.err.startswith("seepfe: error:")
    assert main(["-v", "plot", str(DEMO), "--out", str(tmp_path / "v"), "--order", "1", "--size", "10",
                 "--no-detail"]) == 0
    cap = capsys.readouterr()
    assert "seepfe: mesh:" in cap.err and "seepfe: checks along" in cap.err
    assert "seepfe: figure 1 of " in cap.err and "seepfe:" not in cap.out
    assert "written:" in cap.out


def test_size_is_in_the_file_length_unit(capsys):
    us = DEMO.parent / "levee_us.json"
    assert main(["check", str(us), "--order", "1", "--size", "20"]) == 0
    out = capsys.readouterr().out
    row = out.split("mesh")[-1].splitlines()[3].split()
    assert "size (ft)" in out and float(row[3]) == 20.0
    import pytest
    with pytest.raises(SystemExit) as e:              # argparse's own usage error: exit code 2
        main(["check", str(us), "--size", "-1"])
    assert e.value.code == 2 and "must be a finite number > 0" in capsys.readouterr().err


def test_output_folders_follow_the_umask(tmp_path, capsys):
    import os
    old = os.umask(0o022)
    try:
        assert main(["solve", str(DEMO), "--out", str(tmp_path / "o"), "--order", "1", "--size", "10"]) == 0
    finally:
        os.umask(old)
    assert (tmp_path / "o").stat().st_mode & 0o777 == 0o755
    assert (tmp_path / "o" / "input").stat().st_mode & 0o777 == 0o755


@pytest.mark.parametrize("cmd", ["solve", "plot", "report", "check"])
def test_a_file_that_is_not_json_answers_before_numpy_is_imported(tmp_path, cmd):
    # the one-line error of a broken file must not wait for the numerical stack (issue 11: well under half a
    # second): the file is parsed with the standard library before anything heavy is imported
    bad = tmp_path / "bad.json"
    bad.write_text('{"title": "x", "materials": ', encoding="utf-8")
    args = [cmd, str(bad)] + ([] if cmd == "check" else ["--out", str(tmp_path / "out")])
    code = ("import sys\nfrom seepfe.cli import main\nrc = main(%r)\n"
            "print(rc, 'numpy' in sys.modules, 'pydantic' in sys.modules)" % (args,))
    p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=tmp_path, timeout=60)
    assert p.stdout.split() == ["2", "False", "False"], p.stdout + p.stderr
    assert p.stderr.startswith(f"seepfe: error: {bad}: not valid JSON at line 1"), p.stderr
    assert not (tmp_path / "out").exists()
