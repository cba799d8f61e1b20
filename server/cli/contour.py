"""`shockslate contour`: wall shapes from a drawn contour (CSV x,r points, DXF polylines/splines, SVG paths).

    shockslate contour nozzle.dxf --units mm [--mirror] [--close] [--into SCENARIO] --out FILE

With --into (a scenario file or a built-in name) the walls are added to that scenario's sketch and the result
is written as a new scenario file; without it, --out gets a sketch fragment {"mirror": ..., "shapes": [...]}.
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

EXIT_OK, EXIT_BAD_INPUT = 0, 2


def add_contour_command(sub) -> argparse.ArgumentParser:
    from shockslate.solver.contour_import import FORMATS, UNITS

    p = sub.add_parser(
        "contour", help="turn a drawn contour (CSV, DXF, SVG) into wall shapes",
        description="Read closed contours from a CSV file of x, r points, a DXF drawing (polylines, splines, "
                    "circles, ellipses) or an SVG picture (paths, polygons), scale them by the chosen unit and "
                    "write them as wall polygons. Open, self-crossing or empty contours are refused with the "
                    "place they go wrong.")
    p.add_argument("file", type=Path, help="the contour file (.csv, .dxf or .svg)")
    p.add_argument("--units", required=True, choices=list(UNITS), help="unit of the numbers in the file")
    p.add_argument("--format", choices=list(FORMATS), help="file format (default: from the extension)")
    p.add_argument("--mirror", action="store_true", help="also add each contour mirrored about the axis (y = 0)")
    p.add_argument("--close", action="store_true", help="close open contours with a straight piece")
    p.add_argument("--into", metavar="SCENARIO", help="a scenario file or built-in name to add the walls to")
    p.add_argument("--out", required=True, type=Path, metavar="FILE", help="file to write")
    p.set_defaults(func=cmd_contour)
    return p


def _bad(text: str) -> int:
    print(f"shockslate contour: {text}", file=sys.stderr)
    return EXIT_BAD_INPUT


def cmd_contour(args: argparse.Namespace) -> int:
    from shockslate.solver.contour_import import ContourError, import_contours
    from shockslate.solver.scenario import (ScenarioError, builtin_names, load_builtin, load_scenario,
                                            parse_scenario, scenario_to_dict, scenario_to_json)
    from shockslate.solver.shapes import shape_to_dict

    try:
        shapes = import_contours(args.file, args.units, mirror=args.mirror, close=args.close, fmt=args.format)
    except ContourError as err:
        return _bad(str(err))
    dicts = [shape_to_dict(s) for s in shapes]
    if args.into is None:
        text = json.dumps({"mirror": "none", "shapes": dicts}, indent=2) + "\n"
        what = f"a sketch with {len(dicts)} wall shape(s)"
    else:
        try:
            if Path(args.into).is_file():
                base = load_scenario(args.into)
            elif args.into in builtin_names():
                base = load_builtin(args.into)
            else:
                return _bad(f"--into = {args.into!r} is not allowed: must be a scenario file or one of the built-ins "
                            + ", ".join(builtin_names()))
            doc = scenario_to_dict(base)
            doc["sketch"]["shapes"].extend(dicts)
            text = scenario_to_json(parse_scenario(doc))
        except ScenarioError as err:
            return _bad(f"--into: {err}")
        what = f"scenario {base.name!r} with {len(dicts)} wall shape(s) added"
    try:
        args.out.write_text(text, encoding="utf-8")
    except OSError as err:
        return _bad(f"--out = {str(args.out)!r} cannot be written: {err.strerror}")
    print(f"wrote {args.out}: {what}")
    return EXIT_OK
