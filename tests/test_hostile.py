"""The hostile-input and fault corpus (issue 15): a user's files are never deleted, no foreign code runs,
bad input is one line (exit 2) before any long solve, nothing hangs or runs away, and nonsense is
refused instead of accepted silently.

Every section here is a tiny invented one (a 40 m wide levee strip, P1, a few hundred elements), so the
file stays quick; what needs worker processes or signals is marked slow (CI runs it: .ci/run).
"""

import copy
import csv
import json
import math
import os
import signal
import subprocess
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pytest

import seepfe
from seepfe.cli import main
from seepfe.errors import SectionError, SeepfeError
from seepfe.sweep import load_sweep, run_sweep

ROOT = Path(__file__).resolve().parents[1]

TINY = {
    "title": "Invented tiny levee",
    "materials": {"fill": {"k": 1e-6, "unit_weight": 19.0}, "sand": {"k": 1e-4, "unit_weight": 20.0}},
    "zones": [{"name": "levee", "material": "fill", "polygon": [[-6, 0], [6, 0], [1, 3], [-1, 3]]},
              {"name": "ground", "material": "sand",
               "polygon": [[-20, 0], [-6, 0], [6, 0], [20, 0], [20, -5], [-20, -5]]}],
    "boundaries": [{"name": "river", "polyline": [[-20, 0], [-6, 0]], "head": 2.0},
                   {"name": "landside", "polyline": [[6, 0], [20, 0]], "seepage_face": True}],
    "mesh": {"size": 2.0, "order": 1},
}
SWEEP = {"vary": {"boundaries.river.head": [1.0, 2.0]}, "exit": ["landside"]}


def tiny(**changes):
    d = copy.deepcopy(TINY)
    d.update(changes)
    return d


def _write(path: Path, data) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(data) if not isinstance(data, str) else data)
    return path


def _one_line_error(capsys, *words):
    lines = capsys.readouterr().err.strip().splitlines()
    err = [ln for ln in lines if "━" not in ln]            # a sweep's progress bars go to stderr too
    assert len(err) == 1 and err[0].startswith("seepfe: error:") and lines[-1] == err[0], lines
    for w in words:
        assert w in err[0], (w, err[0])
    return err[0]


def _tree(folder: Path) -> dict:
    return {p.relative_to(folder).as_posix(): (p.read_bytes() if p.is_file() else None)
            for p in sorted(folder.rglob("*"))}


def _no_solve(monkeypatch):
    """Make any solve fail loudly: the command must stop before it."""
    import seepfe.solver

    def boom(*a, **k):
        raise AssertionError("solved before checking --out")
    monkeypatch.setattr(seepfe.solver, "solve", boom)


def _no_mesh(monkeypatch):
    """Make meshing fail loudly: the input must be refused while it is read."""
    import seepfe.solver

    def boom(*a, **k):
        raise AssertionError("meshed before refusing the input")
    monkeypatch.setattr(seepfe.solver, "make_mesh", boom)


def _cmd(cmd, sec, out):
    if cmd == "sweep":
        return ["sweep", str(sec), str(_write(sec.parent / "sw.json", SWEEP)), "--out", str(out), "--workers", "1",
                "--no-plots"]
    return [cmd, str(sec), "--out", str(out)] + (["--no-detail"] if cmd == "plot" else [])


# =========================================================================== 1. user files are never deleted
COMMANDS = ["solve", "plot", "report", "sweep"]


@pytest.mark.parametrize("cmd", COMMANDS)
def test_user_files_survive_every_command(tmp_path, capsys, monkeypatch, cmd):
    """A folder holding summary.json and .seepfe (what the old check took as 'a seepfe folder'), the
    user's thesis, a data folder and the section file itself is refused, and nothing in it changes."""
    out = tmp_path / "work"
    (out / "data").mkdir(parents=True)
    (out / "thesis.docx").write_bytes(b"PK\x03\x04 my thesis")
    (out / "data" / "survey.csv").write_text("x,y\n1,2\n")
    (out / "summary.json").write_text("{}")
    (out / ".seepfe").write_text("written by seepfe\n")
    sec = _write(out / "levee.json", TINY)
    if cmd == "sweep":             # a sweep folder whose results/ the user filled: the same story one level down
        (out / ".seepfe-sweep").write_text("")
        (out / "results").mkdir()
        (out / "results" / "notes.txt").write_text("mine")
        (out / "results" / "summary.json").write_text("{}")
        (out / "results" / ".seepfe").write_text("written by seepfe\n")
    args = _cmd(cmd, sec, out)
    before = _tree(out)
    _no_solve(monkeypatch)
    assert main(args) == 2
    _one_line_error(capsys, str(out))
    assert _tree(out) == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["work"]          # no temporary folder beside it


def test_a_folder_with_subfolders_is_replaced_whole_and_follows_the_umask(tmp_path):
    from seepfe.output import atomic_dir
    out = tmp_path / "out"
    old = os.umask(0o022)
    try:
        for run in range(2):
            with atomic_dir(out) as tmp:
                (tmp / "figures" / "deep").mkdir(parents=True)
                (tmp / "figures" / "deep" / f"f{run}.png").write_bytes(b"png")
                (tmp / "summary.json").write_text("{}")
    finally:
        os.umask(old)
    assert sorted(p.relative_to(out).as_posix() for p in out.rglob("*")) == [
        ".seepfe", "figures", "figures/deep", "figures/deep/f1.png", "summary.json"]
    for d in (out, out / "figures", out / "figures" / "deep"):
        assert d.stat().st_mode & 0o777 == 0o755, d
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out"]


@pytest.mark.parametrize("cmd", ["solve"])
def test_only_a_folder_seepfe_wrote_and_left_alone_is_replaced(tmp_path, capsys, cmd):
    sec = _write(tmp_path / "levee.json", TINY)
    out = tmp_path / "out"
    old = os.umask(0o022)
    try:
        assert main(_cmd(cmd, sec, out)) == 0
    finally:
        os.umask(old)
    for d in [out] + [p for p in out.rglob("*") if p.is_dir()]:            # figures/ for a report
        assert d.stat().st_mode & 0o777 == 0o755, d     # the umask (mkdtemp gave 0700: a checker could not open it)
    manifest = json.loads((out / ".seepfe").read_text())
    assert manifest["written_by"] == "seepfe" and manifest["files"]
    assert set(manifest["files"]) == {p.relative_to(out).as_posix() for p in out.rglob("*")
                                      if p.is_file() and p.name != ".seepfe"}
    assert main(_cmd(cmd, sec, out)) == 0                     # its own folder (subfolders too): replaced
    capsys.readouterr()
    (out / "my notes.txt").write_text("keep")                 # a file added by hand: refused
    assert main(_cmd(cmd, sec, out)) == 2
    _one_line_error(capsys, "my notes.txt", "nothing was deleted")
    assert (out / "my notes.txt").read_text() == "keep"
    (out / "my notes.txt").unlink()
    first = sorted(manifest["files"])[0]
    (out / first).write_bytes((out / first).read_bytes() + b" edited")   # a file edited by hand: refused
    assert main(_cmd(cmd, sec, out)) == 2
    _one_line_error(capsys, first, "changed")
    assert (out / first).read_bytes().endswith(b" edited")


@pytest.mark.parametrize("cmd", COMMANDS)
@pytest.mark.parametrize("where", ["current folder", "a file", "under a file", "foreign folder"])
def test_out_is_checked_before_any_solve(tmp_path, capsys, monkeypatch, cmd, where):
    sec = _write(tmp_path / "in" / "levee.json", TINY)
    blocker = tmp_path / "blocker"
    blocker.write_text("a file")
    foreign = tmp_path / "foreign"
    foreign.mkdir()
    (foreign / "a.txt").write_text("a")
    out = {"current folder": Path("."), "a file": blocker, "under a file": blocker / "out",
           "foreign folder": foreign}[where]
    monkeypatch.chdir(tmp_path / "in")
    _no_solve(monkeypatch)
    assert main(_cmd(cmd, sec, out)) == 2
    _one_line_error(capsys)
    assert blocker.read_text() == "a file" and (foreign / "a.txt").read_text() == "a"
    left = sorted(p.name for p in (tmp_path / "in").iterdir())
    assert left == ["levee.json"] + (["sw.json"] if cmd == "sweep" else [])


@pytest.mark.parametrize("mask, mode", [(0o022, 0o755), (0o027, 0o750), (0o002, 0o775)])
def test_folders_follow_the_umask(tmp_path, capsys, mask, mode):
    old = os.umask(mask)
    try:
        sec = _write(tmp_path / "levee.json", TINY)
        assert main(["solve", str(sec), "--out", str(tmp_path / "deep" / "out")]) == 0
    finally:
        os.umask(old)
    for d in (tmp_path / "deep", tmp_path / "deep" / "out"):
        assert d.stat().st_mode & 0o777 == mode, d


def test_partial_folders_of_killed_runs_are_cleaned(tmp_path, capsys):
    from seepfe import output
    sec = _write(tmp_path / "levee.json", TINY)
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True,
                          text=True).stdout.strip()
    stale = tmp_path / f".out.seepfe-tmp-{output._HOST}-{dead}-0a1b2c3d"
    stale_old = tmp_path / f".out.seepfe-old-{output._HOST}-{dead}-0a1b2c3e"
    live = tmp_path / f".out.seepfe-tmp-{output._HOST}-{os.getpid()}-0a1b2c3f"
    mine = tmp_path / f".out.seepfe-tmp-{output._HOST}-{dead}-user"          # no seepfe marker: not ours
    for p in (stale, stale_old, live, mine):
        p.mkdir()
        (p / "nodes.csv").write_text("half")
    for p in (stale, stale_old, live):
        (p / ".seepfe").write_text("{}")
    assert main(["solve", str(sec), "--out", str(tmp_path / "out")]) == 0
    assert not stale.exists() and not stale_old.exists()
    assert live.exists() and mine.exists()


_SIGTERM_MID_WRITE = """
import os, signal, sys, time
import seepfe.output as o
real = o.write_analysis
def slow(*a, **k):
    names = real(*a, **k)
    os.kill(os.getpid(), signal.SIGTERM)
    time.sleep(30)
    return names
o.write_analysis = slow
from seepfe.cli import main
sys.exit(main(sys.argv[1:]))
"""


def test_sigterm_while_writing_leaves_nothing_half_written(tmp_path):
    sec = _write(tmp_path / "levee.json", TINY)
    out = tmp_path / "out"
    p = subprocess.run([sys.executable, "-c", _SIGTERM_MID_WRITE, "solve", str(sec), "--out", str(out)],
                       capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert p.returncode == 128 + signal.SIGTERM, p.stderr
    assert p.stderr.strip().splitlines()[-1].startswith("seepfe: stopped by SIGTERM")
    assert sorted(x.name for x in tmp_path.iterdir()) == ["levee.json"]


# =========================================================================== 2. no foreign code in workers
_PLANTED = """
import pathlib
pathlib.Path(__file__).with_name("PLANTED-MODULE-RAN").write_text("ran")
raise SystemExit("planted module ran")
"""


@pytest.mark.slow
def test_sweep_workers_never_import_from_the_working_directory(tmp_path, monkeypatch):
    work = tmp_path / "work"
    work.mkdir()
    (work / "multiprocessing.py").write_text(_PLANTED)
    monkeypatch.chdir(work)
    monkeypatch.syspath_prepend("")          # as 'python -c' or 'python -m' would have it
    rep = run_sweep(TINY, SWEEP, out=tmp_path / "sw", workers=2, plots=False)
    assert rep.complete and rep.solved == 2 and rep.failed == 0
    assert not (work / "PLANTED-MODULE-RAN").exists()


def _children(pid: int) -> list[int]:
    out = []
    for d in Path("/proc").iterdir():
        if d.name.isdigit():
            try:
                if int((d / "stat").read_text().rsplit(")", 1)[1].split()[1]) == pid:
                    out.append(int(d.name))
            except (OSError, IndexError, ValueError):
                pass
    return out


def _alive(pid: int) -> bool:
    try:
        st = (Path("/proc") / str(pid) / "stat").read_text()
    except OSError:
        return False
    return st.rsplit(")", 1)[1].split()[0] != "Z"


@pytest.mark.slow
@pytest.mark.skipif(not Path("/proc/self/stat").exists(), reason="needs /proc")
@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGKILL], ids=["SIGTERM", "SIGKILL"])
def test_a_killed_sweep_leaves_no_workers(tmp_path, sig):
    sec = _write(tmp_path / "levee.json", tiny(mesh={"size": 0.5, "order": 2}))
    sw = _write(tmp_path / "sw.json", {"vary": {"boundaries.river.head": {"from": 0.5, "to": 2.5, "count": 400}}})
    p = subprocess.Popen([sys.executable, "-c", "import sys; from seepfe.cli import main; sys.exit(main(sys.argv[1:]))",
                          "sweep", str(sec), str(sw), "--out", str(tmp_path / "sw"), "--workers", "2", "--no-plots"],
                         stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=ROOT)
    t0 = time.time()
    while time.time() - t0 < 90 and len(list((tmp_path / "sw" / "cases").glob("*.json"))) < 2:
        time.sleep(0.1)
    kids = _children(p.pid)
    assert len(kids) >= 2 and p.poll() is None
    p.send_signal(sig)
    p.wait(timeout=60)
    t0 = time.time()
    while time.time() - t0 < 20 and any(_alive(k) for k in kids):
        time.sleep(0.2)
    left = [k for k in kids if _alive(k)]
    for k in left:                           # do not leave them running whatever happens
        os.kill(k, signal.SIGKILL)
    assert not left, "worker processes outlived the sweep"
    if sig == signal.SIGTERM:
        assert p.returncode == 128 + signal.SIGTERM


@pytest.mark.slow
def test_a_dead_worker_is_one_line_and_the_finished_cases_are_kept(tmp_path):
    from seepfe.sweep.runner import Runner
    payload = {"section": tiny(mesh={"size": 0.5, "order": 2}), "solve": {}, "points": {}, "exit": ["landside"]}
    payloads = []
    for h in np.linspace(0.5, 2.5, 12):
        p = copy.deepcopy(payload)
        p["section"]["boundaries"][0]["head"] = float(h)
        payloads.append(p)
    killed = []
    with Runner(cache_dir=tmp_path / "cases", workers=2) as r:
        def progress(done, total, cached):
            if done >= 1 and not killed and r._pool is not None:
                pid = next(iter(r._pool._processes))
                os.kill(pid, signal.SIGKILL)             # what the out-of-memory killer does
                killed.append(pid)
        with pytest.raises(SeepfeError, match="worker process died") as e:
            r.run(payloads, progress)
    assert "\n" not in str(e.value) and killed
    assert len(list((tmp_path / "cases").glob("*.json"))) >= 1


# =========================================================================== 3. formulas in CSV
FORMULAS = ["=HYPERLINK(\"http://example.invalid\")", "+cmd|' /C calc'!A0", "-2+3", "@SUM(1+1)"]


def test_csv_cells_a_spreadsheet_would_evaluate_are_neutralised():
    from seepfe.csvfile import csv_cell
    for f in FORMULAS + ["\tx", "\rx"]:
        assert csv_cell(f).startswith("'")
    assert csv_cell(-1.5) == "-1.5" and csv_cell(float("-inf")) == "-inf" and csv_cell(-3) == "-3"
    assert csv_cell("sand") == "sand" and csv_cell(True) == "yes"


@pytest.mark.parametrize("name", FORMULAS)
def test_sweep_tables_carry_no_formula(tmp_path, name):
    d = tiny()
    face = "landside" if name.startswith("=") else name        # '=...' in a section is an expression
    d["boundaries"][1]["name"] = face
    sw = {"vary": {"boundaries.river.head": [1.0, 2.0]}, "exit": [face],
          "targets": [{"name": name, "parameter": "boundaries.river.head", "range": [0.5, 2.5], "tolerance": 1.0,
                       "quantity": "fs", "at_least": 1.0}]}
    rep = run_sweep(d, sw, out=tmp_path / "sw", workers=1, plots=False)
    assert rep.complete
    cells = 0
    for f in ("table.csv", "targets.csv"):
        with open(tmp_path / "sw" / "results" / f, newline="") as fh:
            for row in csv.reader(fh):
                for c in row:
                    cells += 1
                    if c[:1] in ("=", "+", "-", "@", "\t", "\r"):
                        float(c)                # only a number may start so (a negative flow)
    assert cells > 20
    written = (tmp_path / "sw" / "results" / "targets.csv").read_text()
    assert "'" + name.replace('"', '""') in written                  # still there, as text


def test_exit_check_csv_headers_and_cells_are_numbers(tmp_path, capsys):
    d = tiny()
    d["boundaries"][1]["name"] = "+cmd"
    sec = _write(tmp_path / "levee.json", d)
    assert main(["solve", str(sec), "--out", str(tmp_path / "out")]) == 0
    for f in (tmp_path / "out").glob("*.csv"):
        rows = list(csv.reader(f.read_text().splitlines()))
        assert all(not h.startswith(("=", "+", "-", "@")) for h in rows[0])
        assert all(math.isfinite(float(c)) or c in ("nan", "inf", "-inf") for r in rows[1:] for c in r)


# =========================================================================== 4. one line on the terminal
@pytest.mark.parametrize("where, value", [
    ("title", "Levee\n\x1b[32mvalid."), ("title", "a\u2028b"), ("title", "x\u202eevil"),
    ("zone", "levee\x1b[2J"), ("boundary", "landside\r"), ("material", "fill\x00"),
])
def test_control_characters_in_names_and_titles_are_refused(tmp_path, capsys, where, value):
    d = tiny()
    if where == "title":
        d["title"] = value
    elif where == "zone":
        d["zones"][0]["name"] = value
    elif where == "boundary":
        d["boundaries"][1]["name"] = value
    else:
        d["materials"][value] = d["materials"].pop("fill")
        d["zones"][0]["material"] = value
    sec = _write(tmp_path / "s.json", d)
    assert main(["check", str(sec)]) == 2
    line = _one_line_error(capsys, "control character")
    assert "\x1b" not in line and "\r" not in line and "\x00" not in line
    assert capsys.readouterr().out == ""


def test_unknown_key_with_a_newline_is_printed_on_one_line(tmp_path, capsys):
    d = tiny()
    d["materials"]["fill"]["k\nvalid."] = 1
    assert main(["check", str(_write(tmp_path / "s.json", d))]) == 2
    assert "\\n" in _one_line_error(capsys, "unknown key")


def test_a_lone_surrogate_in_the_title_is_one_line_and_no_folder(tmp_path, capsys):
    sec = _write(tmp_path / "s.json", json.dumps(TINY).replace("Invented tiny levee", "a\\ud800b"))
    assert main(["solve", str(sec), "--out", str(tmp_path / "out")]) == 2
    _one_line_error(capsys, "title")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["s.json"]


def test_math_text_in_names_is_shown_literally(tmp_path, capsys):
    d = tiny(title="Levee $5 $\\frac{a$")
    d["boundaries"][1]["name"] = "$\\frac{a$"
    d["zones"][0]["material"] = "$x$"
    d["materials"]["$x$"] = d["materials"].pop("fill")
    sec = _write(tmp_path / "s.json", d)
    assert main(["plot", str(sec), "--out", str(tmp_path / "out"), "--no-detail"]) == 0
    from seepfe.plot.base import boundary_label, text
    from matplotlib.text import Text
    for s in (text("$x$"), boundary_label(seepfe.load_section(d).spec.boundaries[1])):
        shown, is_math = Text(0, 0, s)._preprocess_math(s)
        assert not is_math and "$" in shown


# =========================================================================== 5. one sweep per folder
def test_a_second_sweep_into_the_same_folder_is_refused(tmp_path, capsys):
    import fcntl
    sec = _write(tmp_path / "levee.json", TINY)
    sw = _write(tmp_path / "sw.json", SWEEP)
    out = tmp_path / "sw"
    out.mkdir()
    (out / ".seepfe-sweep").write_text("")
    with open(out / ".seepfe-sweep", "a") as fh:          # a sweep running in another process holds this
        fcntl.flock(fh.fileno(), fcntl.LOCK_EX | fcntl.LOCK_NB)
        assert main(["sweep", str(sec), str(sw), "--out", str(out), "--workers", "1"]) == 2
        _one_line_error(capsys, "another seepfe sweep")
    assert not (out / "cases").exists()
    assert main(["sweep", str(sec), str(sw), "--out", str(out), "--workers", "1", "--no-plots"]) == 0


# =========================================================================== 6. cached records
def _nullify(node):
    if isinstance(node, dict):
        return {k: (v if k in ("status",) else _nullify(v)) for k, v in node.items()}
    if isinstance(node, list):
        return [_nullify(v) for v in node]
    return None if isinstance(node, (int, float)) and not isinstance(node, bool) else node


@pytest.mark.parametrize("alter", ["nulls", "missing key", "status", "huge number", "wrong points", "not json"])
def test_an_altered_cached_case_is_solved_again(tmp_path, alter):
    sw = dict(SWEEP, points={"toe": [8.0, -1.0]})
    first = run_sweep(TINY, sw, out=tmp_path / "sw", workers=1, plots=False)
    files = sorted((tmp_path / "sw" / "cases").glob("*.json"))
    assert len(files) == 2
    doc = json.loads(files[0].read_text())
    rec = doc["record"]
    if alter == "nulls":                       # every number null, the row still 'ok' (issue 15)
        doc["record"] = _nullify(rec)
    elif alter == "missing key":
        del rec["flows_m3_s_per_m"]
    elif alter == "status":
        rec["status"] = "fine"
    elif alter == "huge number":
        rec["balance_relative_error"] = "__HUGE__"
    elif alter == "wrong points":
        rec["heads_m"] = {"elsewhere": 1.0}
    text = json.dumps(doc).replace('"__HUGE__"', "1e999")
    files[0].write_text(text if alter != "not json" else text[:-5])
    again = run_sweep(TINY, sw, out=tmp_path / "sw", workers=1, plots=False)
    assert again.solved == 1 and again.cached == 1
    assert [r["fs"] for r in again.table] == [r["fs"] for r in first.table]
    assert [r["head_toe_m"] for r in again.table] == [r["head_toe_m"] for r in first.table]
    assert json.loads(files[0].read_text())["record"]["flows_m3_s_per_m"]


def test_record_fault_names_what_is_wrong():
    from seepfe.sweep.cache import record_fault
    from seepfe.sweep.case import run_case
    payload = {"section": TINY, "solve": {}, "points": {}, "exit": ["landside"]}
    rec = run_case(payload)
    assert record_fault(rec, payload) is None
    assert "missing 'governing'" in record_fault({k: v for k, v in rec.items() if k != "governing"})
    assert "finite" in record_fault({**rec, "flows_m3_s_per_m": {"river": math.inf, "landside": 0.0}})
    assert "status" in record_fault({**rec, "status": "error: x"})
    assert record_fault({**rec, "nodes": 0})


def test_something_else_where_a_cache_file_goes_is_one_line_before_solving(tmp_path, capsys, monkeypatch):
    sec = _write(tmp_path / "levee.json", TINY)
    sw = _write(tmp_path / "sw.json", SWEEP)
    out = tmp_path / "sw"
    assert main(["sweep", str(sec), str(sw), "--out", str(out), "--workers", "1", "--no-plots"]) == 0
    capsys.readouterr()
    case = sorted((out / "cases").glob("*.json"))[0]
    case.unlink()
    case.mkdir()
    (case / "keep.txt").write_text("mine")
    _no_solve(monkeypatch)
    assert main(["sweep", str(sec), str(sw), "--out", str(out), "--workers", "1", "--no-plots"]) == 2
    _one_line_error(capsys, case.name)
    assert (case / "keep.txt").read_text() == "mine"


def test_a_sweep_whose_every_case_failed_exits_2(tmp_path, capsys):
    sec = _write(tmp_path / "levee.json", TINY)
    sw = _write(tmp_path / "sw.json", {"vary": {"materials.fill.k": [1e-30, 1e-31]}})
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert main(["sweep", str(sec), str(sw), "--out", str(tmp_path / "sw"), "--workers", "1"]) == 2
    _one_line_error(capsys, "every case of the sweep failed")
    assert (tmp_path / "sw" / "results" / "table.csv").is_file()        # the table says why, case by case


# =========================================================================== one-line errors, before any solve
def _deep(n):
    return '{"title": "x", "a": ' + "[" * n + "1" + "]" * n + "}"


RAW = {
    "nested 900 deep": (_deep(900), "nested more than"),
    "objects nested 900 deep": ('{"a":' * 900 + "1" + "}" * 900, "nested more than"),
    "a 401-digit integer": (json.dumps(TINY).replace('"head": 2.0', '"head": 1' + "0" * 400), "401 digits"),
    "a 5000-digit integer": (json.dumps(TINY).replace('"head": 2.0', '"head": 1' + "0" * 5000), "5001 digits"),
    "duplicate keys": (json.dumps(TINY)[:-1] + ', "title": "again"}', "duplicate key 'title'"),
    "duplicate key in a boundary": (json.dumps(TINY).replace('"head": 2.0', '"head": 2.0, "head": 3.0'),
                                    "duplicate key 'head' in the object named 'river'"),
    "NaN": (json.dumps(TINY).replace('"head": 2.0', '"head": NaN'), "not a number JSON allows"),
}


@pytest.mark.parametrize("case", list(RAW))
def test_raw_file_faults_are_one_line(tmp_path, capsys, case):
    text, words = RAW[case]
    sec = _write(tmp_path / "s.json", text)
    assert main(["check", str(sec)]) == 2
    _one_line_error(capsys, str(sec), words)


@pytest.mark.parametrize("enc, words", [("utf-16-le", "UTF-16"), ("utf-16", "UTF-16"), ("utf-32-le", "UTF-16")])
def test_utf16_gets_an_encoding_hint(tmp_path, capsys, enc, words):
    p = tmp_path / "s.json"
    p.write_bytes(json.dumps(TINY).encode(enc))
    assert main(["check", str(p)]) == 2
    _one_line_error(capsys, words, "UTF-8")


@pytest.mark.parametrize("path, words", [("/dev/zero", "larger than"), ("{tmp}", "is a folder")])
def test_input_files_are_read_with_a_cap(tmp_path, capsys, path, words):
    if path == "/dev/zero" and not Path(path).exists():
        pytest.skip("no /dev/zero")
    assert main(["check", path.format(tmp=tmp_path)]) == 2
    _one_line_error(capsys, words)
    sw = tmp_path / "sw.json"
    sw.write_bytes(b" " * (64 * 1024 * 1024 + 10))
    with pytest.raises(SectionError, match="larger than"):
        load_sweep(sw)


def _set(path, value):
    def f(d):
        node = d
        for k in path[:-1]:
            node = node[k]
        node[path[-1]] = value
    return f


MUTATIONS = {
    "empty polygon": (_set(("zones", 0, "polygon"), []), "at least 3 distinct points"),
    "checks.spacing 1e-9": (_set(("checks",), {"spacing": 1e-9}), "checks.spacing"),
    "head 1e300": (_set(("boundaries", 0, "head"), 1e300), "head"),
    "head 1e6 m": (_set(("boundaries", 0, "head"), 1e6), "above the top of the section"),
    "unit weight below water's": (_set(("materials", "sand", "unit_weight"), 5.0), "not more than water's"),
    "unit weight at water's": (_set(("materials", "sand", "unit_weight"), 9.81), "not more than water's"),
    "unit weight in N/m3": (_set(("materials", "sand", "unit_weight"), 19000.0), "more than any soil"),
    "water unit weight 30": (_set(("water",), {"unit_weight": 30.0}), "water.unit_weight"),
    "toe_x 1e8": (_set(("checks",), {"toe_x": 1e8}), "checks.toe_x"),
    "refine point outside": (_set(("mesh", "refine"), [{"point": [500.0, 500.0], "size": 0.5}]),
                             "mesh.refine[0]"),
    "Bengali four": (_set(("boundaries", 0, "head"), "=\u09ea"), "plain ASCII"),
    "parameter null": (_set(("parameters",), {"a": None}), "got null"),
    "huge flux": (lambda d: d["boundaries"].append({"name": "rain", "polyline": [[-1, 3], [1, 3]], "flux": 1e300}),
                  "flux"),
    "thin wall": (_set(("remedies",), [{"type": "cutoff_wall", "x": 0, "bottom": -3, "thickness": 1e-5, "k": 1e-9}]),
                  "thickness 1e-05 m is too thin"),
    "wall that needs too many elements": (
        lambda d: (d.update(remedies=[{"type": "cutoff_wall", "x": 0, "bottom": -3, "thickness": 1e-3, "k": 1e-9}]),
                   d["mesh"].update(max_elements=20000)), "thickness 0.001 m needs elements"),
    "well outlet far above": (_set(("remedies",), [{"type": "relief_wells", "x": 10, "spacing": 10, "radius": 0.1,
                                                     "penetration": 2, "discharge_elevation": 1e4}]),
                              "discharge elevation + well loss"),
    "riser beyond any material": (_set(("remedies",), [{"type": "relief_wells", "x": 10, "spacing": 1.0,
                                                         "radius": 0.1, "penetration": 2, "discharge_elevation": 900}]),
                                  "riser of the model well"),
}


@pytest.mark.parametrize("case", list(MUTATIONS))
def test_bad_values_are_one_line_before_any_solve(tmp_path, capsys, monkeypatch, case):
    mutate, words = MUTATIONS[case]
    d = tiny()
    mutate(d)
    sec = _write(tmp_path / "s.json", d)
    _no_mesh(monkeypatch)
    assert main(["solve", str(sec), "--out", str(tmp_path / "out")]) == 2
    _one_line_error(capsys, str(sec), words)
    assert not (tmp_path / "out").exists()


def test_dicts_get_the_same_depth_and_number_checks():
    d = tiny()
    d["parameters"] = {"a": 10 ** 400}
    with pytest.raises(SectionError, match="digits"):
        seepfe.load_section(d)
    d = tiny()
    d["zones"][0]["again"] = d["zones"]                     # a dict holding itself
    with pytest.raises(SectionError, match="nested more than"):
        seepfe.load_section(d)


def test_a_parameter_chain_1200_long_resolves():
    d = tiny(parameters={**{f"p{i}": f"=p{i + 1}" for i in range(1200)}, "p1200": 2.5})
    d["boundaries"][0]["head"] = "=p0"
    assert seepfe.load_section(d).spec.boundaries[0].head == 2.5


def test_an_expression_giving_a_whole_number_fills_a_count():
    d = tiny(parameters={"n": 20000})
    d["mesh"]["max_elements"] = "=n"
    d["mesh"]["order"] = "=1"
    s = seepfe.load_section(d).spec.mesh
    assert s.max_elements == 20000 and s.order == 1


def test_figure_numbers_never_crash():
    from seepfe.plot.base import fmt_sci
    assert fmt_sci(float("inf")) == "inf" and fmt_sci(1e300) and fmt_sci(float("nan")) == "nan"


# =========================================================================== hangs and runaway resources
@pytest.mark.parametrize("sweep, words", [
    ({"mode": "grid", "vary": {"boundaries.river.head": {"from": 0, "to": 3, "count": 3},
                               "materials.sand.k": {"from": 1e-5, "to": 1e-3, "count": 100000, "scale": "log"},
                               "materials.fill.k": {"from": 1e-7, "to": 1e-5, "count": 100000, "scale": "log"}}},
     "30,000,000,000 cases"),
    ({"fragility": {"stage": "boundaries.river.head", "stages": {"from": 0, "to": 3, "count": 100000},
                    "samples": 100000, "conductivity": {"sand": {"cov": 0.5}}}}, "100000 samples x 100000 stages"),
    ({"targets": [{"parameter": "boundaries.river.head", "range": [1.0, 2.0], "tolerance": 1e-17}]},
     "finer than floating-point"),
    ({"fragility": {"stage": "boundaries.river.head", "stages": {"values": [1.0]}, "seed": -1,
                    "conductivity": {"sand": {"cov": 0.5}}}}, "fragility.seed"),
])
def test_sweeps_that_would_never_end_are_refused_at_once(tmp_path, capsys, sweep, words):
    sec = _write(tmp_path / "levee.json", TINY)
    sw = _write(tmp_path / "sw.json", sweep)
    assert main(["sweep", str(sec), str(sw), "--out", str(tmp_path / "sw"), "--workers", "1"]) == 2
    _one_line_error(capsys, words)
    assert not (tmp_path / "sw").exists()


def test_the_case_cap_can_be_raised_on_purpose():
    from seepfe.sweep.spec import load_sweep
    sw = {"vary": {"boundaries.river.head": {"from": 0, "to": 3, "count": 30000}}}
    with pytest.raises(SectionError, match="max_cases"):
        load_sweep(sw)
    assert load_sweep({**sw, "max_cases": 30000})[0].max_cases == 30000


def test_a_bracket_that_cannot_shrink_ends_the_search():
    from seepfe.sweep.spec import TargetSpec
    from seepfe.sweep.target import search
    t = TargetSpec.model_construct(name="t", parameter="p", range=[1.0, 2.0], find="smallest", quantity="fs",
                                   at_least=1.0, at_most=None, tolerance=1e-300, unit=None, fixed={})
    calls = []

    def evaluate(xs):
        calls.extend(xs)
        assert len(calls) < 5000, "the search does not end"
        return [{"status": "ok", "governing": {"fs": 0.5 if x < math.pi / 2 else 2.0, "verdict": "pass"}}
                for x in xs]
    res = search(t, evaluate, 1, 1.5)
    assert res["status"] == "found" and abs(res["value"] - math.pi / 2) < 1e-15
    assert any("cannot split" in w for w in res["warnings"])


def test_a_polygon_with_20000_vertices_loads_through_the_spatial_index():
    x = np.linspace(-20, 20, 20000)
    top = np.column_stack([x, 0.1 * np.sin(x)]).tolist()
    d = {"materials": {"s": {"k": 1e-5}},
         "zones": [{"name": "g", "material": "s", "polygon": [[20.0, -5.0], [-20.0, -5.0]] + top}],
         "boundaries": [{"name": "left", "polyline": [[-20, -5], top[0]], "head": 1.0},
                        {"name": "right", "polyline": [[20, -5], top[-1]], "head": 0.0}]}
    g = seepfe.load_section(d).graph      # quadratic before: 17 s here, now under a second (scripts/bench_geometry.py)
    assert len(g.segments) == 20002 and g.outline.all()
    assert (g.boundary >= 0).sum() == 2


def test_slivers_are_reported_with_their_zone(monkeypatch, caplog):
    import logging

    import seepfe.mesh
    monkeypatch.setattr(seepfe.mesh, "SLIVER_DEG", 60.0)        # every mesh has angles below 60 deg
    with caplog.at_level(logging.WARNING, logger="seepfe"):
        seepfe.make_mesh(seepfe.load_section(TINY))
    assert any("slivers" in r.getMessage() and "zone '" in r.getMessage() for r in caplog.records)


def test_library_warnings_reach_the_terminal_as_one_line(tmp_path, capsys, monkeypatch):
    import seepfe.solver

    def noisy(*a, **k):
        warnings.warn("invalid value encountered in divide", RuntimeWarning)
        raise SeepfeError("stop here")
    monkeypatch.setattr(seepfe.solver, "solve", noisy)
    sec = _write(tmp_path / "s.json", TINY)
    with warnings.catch_warnings():
        warnings.simplefilter("always")
        assert main(["solve", str(sec), "--out", str(tmp_path / "out")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert err == ["seepfe: warning: invalid value encountered in divide (RuntimeWarning)", "seepfe: error: stop here"]


@pytest.mark.skipif(not Path("/dev/zero").exists(), reason="no /dev/zero")
def test_build_inputs_are_read_with_a_cap_too(tmp_path, capsys):
    assert main(["build", "/dev/zero", "--out", str(tmp_path / "s.json")]) == 2
    _one_line_error(capsys, "larger than")
    b = _write(tmp_path / "b.json", {
        "ground": "/dev/zero", "borings": [{"name": "B1", "station": 0, "bottoms": {"sand": -10}}],
        "strata": [{"name": "sand", "material": "sand"}], "materials": {"fill": {"k": 1e-7}, "sand": {"k": 1e-4}},
        "embankment": {"material": "fill", "crest_elevation": 4, "crest_width": 4, "riverside_slope": 2,
                       "landside_slope": 2}, "bottom": -10, "water": {"river": 3, "landside": None}})
    assert main(["build", str(b), "--out", str(tmp_path / "s.json")]) == 2
    _one_line_error(capsys, "larger than")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b.json"]


def _wavy_section(n: int) -> dict:
    x = np.linspace(-20, 20, n)
    top = np.column_stack([x, 0.1 * np.sin(x)]).tolist()
    return {"materials": {"s": {"k": 1e-5}},
            "zones": [{"name": "g", "material": "s", "polygon": [[20.0, -5.0], [-20.0, -5.0]] + top}],
            "boundaries": [{"name": "left", "polyline": [[-20, -5], top[0]], "head": 1.0},
                           {"name": "right", "polyline": [[20, -5], top[-1]], "head": 0.0}]}


def test_a_polygon_whose_vertices_would_take_minutes_to_mesh_is_refused_in_one_line(tmp_path, capsys, monkeypatch):
    # 30,000 vertices 1.3 mm apart on a 40 m ground line: the mesh would follow every one (estimated 2.2e5
    # triangles, made about 2.5x that; 1e5 vertices gave no answer in 20 minutes): refused before gmsh starts,
    # with what to do
    import seepfe.mesh
    p = _write(tmp_path / "wavy.json", _wavy_section(30_000))
    assert main(["check", str(p)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "simplify the polygons" in err[0] and "mesh.max_elements" in err[0], err

    # the same rule on a smaller polygon with the bound lowered (cheaper to load)
    def reached(*a, **k):
        raise SeepfeError("gmsh reached")
    monkeypatch.setattr(seepfe.mesh, "_gmsh_mesh", reached)
    monkeypatch.setattr(seepfe.mesh, "FORCED_MAX", 20_000)
    d = _wavy_section(4_000)
    with pytest.raises(SeepfeError, match="simplify the polygons"):
        seepfe.make_mesh(seepfe.load_section(d))
    # the engineer who sets mesh.max_elements in the file asks for the mesh as drawn: no refusal
    d["mesh"] = {"max_elements": 2_000_000}
    with pytest.raises(SeepfeError, match="gmsh reached"):
        seepfe.make_mesh(seepfe.load_section(d))
