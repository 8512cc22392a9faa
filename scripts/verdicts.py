"""Print the verdict of every example section and of the issue-10 cases, with the hand values beside the FE,
as the markdown table of docs/checks.md ("Verdicts of the examples").

    python3 scripts/verdicts.py            # prints the table (paste it into docs/checks.md)

The cases are built by the tests that check them (tests/test_hand_methods.py, tests/test_checks_blanket.py,
tests/test_analysis.py); the numbers are those the tests see.
"""

from __future__ import annotations

import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path[:0] = [str(ROOT), str(ROOT / "tests")]

import seepfe  # noqa: E402


def _fmt(v, f=".3g"):
    return "-" if v is None else format(v, f)


def _cases():
    import test_analysis as ta
    import test_checks_blanket as tb
    import test_hand_methods as th
    for p in sorted((ROOT / "sections").glob("*.json")):
        if p.name.endswith((".sweep.json", ".build.json", ".observations.json", ".stages.json", ".reach.json")):
            continue
        yield f"`sections/{p.name}`", str(p)
    yield "sheet pile s = 7 m in 12 m of medium sand, H = 4 m", th._sheet_pile()
    yield "levee whose fill is 10x less pervious than its blanket", th._wedge_levee()
    yield "blanket, river on the sand's end face (open end)", tb._levee(river_end="head")
    yield "blanket with a partial cutoff (10 of 20 m)", tb._levee(cutoff=-11.0, size=6.0, fine=2.0)
    yield "homogeneous dam, horizontal drain", th._dam(drain=True, size=0.5)
    yield "homogeneous dam, no drain, 1:2 slope", th._dam(drain=False, size=0.5)
    yield "levee with relief wells", ta.CASES["wells"]
    yield "levee whose fill has no unit weight", ta.CASES["no fill unit weight"]


def main() -> int:
    rows = ["| section | verdict | least FS (mode) at x | largest exit gradient | hand methods beside the FE (hand / FE) |",
            "|---|---|---|---|---|"]
    for name, src in _cases():
        a = seepfe.analyse(seepfe.solve(src))
        g = a.governing
        fs = f"{_fmt(g['fs'])} ({g['mode']}) at {_fmt(g['x_m'], '.1f')} m" if g["fs"] is not None else "-"
        hand = []
        for m in a.hand:
            if not m.applies:
                continue
            vals = [f"{q} {_fmt(h)} / {_fmt(f)}" for q, (h, f) in m.values.items() if h is not None]
            hand.append(f"{m.method}: " + ", ".join(vals))
        rows.append(f"| {name} | {g['verdict']} | {fs} | {_fmt(g['exit_gradient_max'])} | "
                    f"{'; '.join(hand) or 'none applies'} |")
    print("\n".join(rows))
    return 0


if __name__ == "__main__":
    sys.exit(main())
