"""The README's Python blocks run, its JSON block is a valid section, and CI runs its test command."""

import json
import re
from pathlib import Path

import pytest

import seepfe

ROOT = Path(__file__).parent.parent
README = (ROOT / "README.md").read_text()


def _blocks(lang):
    return re.findall(rf"```{lang}\n(.*?)```", README, flags=re.S)


def test_readme_opens_with_the_job_and_the_caution():
    assert README.startswith("# seepfe\n")
    assert "licensed engineer" in README and "local codes" in README


def test_exactly_two_setup_commands_and_ci_runs_the_test_one():
    cmds = [b.strip() for b in _blocks("bash")]
    assert len(cmds) == 2
    ci = (ROOT / ".ci" / "run").read_text()
    assert cmds[1] in ci


@pytest.mark.parametrize("i", range(len(_blocks("python"))))
def test_python_blocks_run(i, monkeypatch, capsys):
    monkeypatch.chdir(ROOT)
    exec(compile(_blocks("python")[i], f"README.md python block {i}", "exec"), {})
    assert capsys.readouterr().out.strip()


def test_json_block_is_a_valid_section():
    r = seepfe.solve(json.loads(_blocks("json")[0]), order=1)
    assert r.balance["relative_error"] < 1e-8
    assert r.boundary_flow("river") > 0 > r.boundary_flow("landside")
