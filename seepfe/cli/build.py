"""``seepfe build PROFILE --out SECTION``: write a section file from a ground line and borings, or from a DXF drawing."""

from __future__ import annotations

import argparse
import sys

EXAMPLE = """examples:
  seepfe build sections/levee_borings.build.json --out levee.json
  seepfe build drawing.build.json --out levee.json        (a build file with "drawing": "levee.dxf")
  seepfe build sections/levee_blanket.json --dxf --out levee.dxf   (a section as a DXF drawing)

A build file names a ground CSV (station, elevation), a boring table (boring, station, stratum,
bottom or depth), the strata and their materials, the embankment, the model's extent and bottom and
the water levels (docs/build.md); or a DXF drawing with closed polylines on layers named after zones
or materials and open polylines on layers named after boundaries (docs/dxf.md). The section file
written is ordinary JSON to read and edit; it is checked before it is written."""


def register(sub) -> None:
    from .common import EXIT_CODES
    b = sub.add_parser("build", help="write a section file from a ground line and borings, or from a DXF drawing",
                       description="Write an ordinary, editable section file from the engineer's own data: a "
                                   "ground survey, boring logs and water levels, or a DXF drawing.",
                       epilog=EXAMPLE + "\n\n" + EXIT_CODES, formatter_class=argparse.RawDescriptionHelpFormatter)
    b.add_argument("profile", help="build file (JSON), or with --dxf a section file")
    b.add_argument("--out", required=True, help="section file to write (JSON; '-' prints it), or with --dxf the "
                                                "drawing (DXF)")
    b.add_argument("--force", action="store_true", help="replace --out if it exists (it may hold your edits)")
    b.add_argument("--dxf", action="store_true", help="write the section given as a DXF drawing instead")
    b.set_defaults(func=run)


def run(args) -> int:
    from ..build import build_section, format_section, read_build, write_file
    from ..errors import SectionError
    from ..section import load_section
    if args.dxf:
        from pathlib import Path

        from ..dxf import write_section_dxf
        sec = load_section(args.profile)
        out = Path(args.out)
        if out.exists() and not args.force:
            raise SectionError(f"{out}: exists; choose another --out, or add --force")
        tmp = out.with_name(f".{out.name}.tmp")
        try:
            write_section_dxf(sec, tmp)
            tmp.replace(out)
        finally:
            tmp.unlink(missing_ok=True)
        print(f"written: {out} ({len(sec.spec.zones)} zones as closed polylines, {len(sec.spec.boundaries)} "
              f"boundaries as open polylines, in {sec.units.length}); read it back with a build file "
              f"{{\"drawing\": \"{out.name}\", \"template\": \"{args.profile}\"}}")
        return 0
    build, base, label = read_build(args.profile)
    notes: list[str] = []
    if "drawing" in build:
        from ..dxf import read_drawing
        data = read_drawing(build, base, label, notes)
    else:
        data = build_section(build, base, label)
    try:
        sec = load_section(data)
    except SectionError as e:
        msg = str(e).removeprefix("<dict>: ")
        raise SectionError(f"{label}: the section built is not valid: {msg}") from None
    text = format_section(data)
    if args.out == "-":
        sys.stdout.write(text)
        return 0
    write_file(args.out, text, force=args.force)
    s = sec.spec
    print(f"written: {args.out} ({len(s.zones)} zones: {', '.join(z.name for z in s.zones)}; boundaries: "
          f"{', '.join(f'{b.name} ({b.kind})' for b in s.boundaries)}; units {sec.units.name})")
    for n in notes + [f"warning: {w}" for w in sec.warnings]:
        print(n)
    print(f"next: seepfe check {args.out}")
    return 0
