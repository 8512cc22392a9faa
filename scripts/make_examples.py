"""Regenerate the example reports in docs/examples/ and the README figures in docs/img/:
the demo report, a stage study and a reach study (invented sections in sections/).

    python3 scripts/make_examples.py
"""

import shutil
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))


def main() -> int:
    from seepfe.cli import main as cli
    ex = ROOT / "docs" / "examples"
    ex.mkdir(parents=True, exist_ok=True)
    tmp = ROOT / ".examples-work"
    shutil.rmtree(tmp, ignore_errors=True)
    try:
        assert cli(["-q", "report", str(ROOT / "sections/levee_blanket.json"), "--out", str(tmp / "single")]) == 0
        assert cli(["-q", "report", str(ROOT / "sections/levee_blanket.json"), "--stages",
                    str(ROOT / "sections/levee_blanket.stages.json"), "--out", str(tmp / "stages")]) == 0
        assert cli(["-q", "reach", str(ROOT / "sections/levee_reach.reach.json"), "--out", str(tmp / "reach")]) == 0
        for name, src in (("levee_report", tmp / "single"), ("levee_stages", tmp / "stages" / "results"),
                          ("levee_reach", tmp / "reach" / "results")):
            dst = ex / name
            shutil.rmtree(dst, ignore_errors=True)
            dst.mkdir()
            shutil.copy(src / "report.html", dst / "report.html")
            if (src / "stations").is_dir():
                shutil.copytree(src / "stations", dst / "stations",
                                ignore=shutil.ignore_patterns("summary.json"))
        from seepfe.analysis import analyse
        from seepfe.plot import exit_gradient_figure, flow_net_figure, save_figure
        from seepfe.solver import solve
        a = analyse(solve(str(ROOT / "sections/levee_blanket.json")))
        from seepfe.plot.base import detail_window
        save_figure(flow_net_figure(a.result, window=detail_window(a.result.section), net=a.flow_net),
                    ROOT / "docs/img/levee_flownet", formats=("png",), dpi=110)
        save_figure(exit_gradient_figure(a.exits["landside"], units=a.result.section.units),
                    ROOT / "docs/img/levee_exit_gradients", formats=("png",), dpi=110)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
    print(f"written: {ex}/levee_report, levee_stages, levee_reach; docs/img/levee_flownet.png, levee_exit_gradients.png")
    return 0


if __name__ == "__main__":
    sys.exit(main())
