"""Wall shapes from drawn contours: CSV points, DXF polylines and splines, SVG paths.

A nozzle or duct often exists already as a drawing. Each closed contour in the file becomes one wall polygon of
the sketch (solver.shapes.Polygon, paints "wall"). The file's numbers are lengths in a unit the user chooses on
import (m, mm, cm, in, ft); `mirror` adds each polygon reflected about the axis (y = 0), for a planar domain
that shows both halves. Contours must be closed (or closed on request), simple (not crossing themselves) and
non-empty; otherwise the error says which contour, where, and what to do.

Formats:
- CSV: two numbers per line, x and r (y); lines starting with '#' and a header line are skipped; a blank line
  starts the next contour. A contour is closed when its last point repeats its first.
- DXF (through ezdxf, a well-kept general-purpose DXF library): LWPOLYLINE and POLYLINE (arcs from bulges
  included), SPLINE, CIRCLE and ELLIPSE in model space, flattened to straight pieces.
- SVG: <path> (every command of the SVG 1.1 path grammar, arcs included), <polygon> and <polyline>, with the
  `transform` of the element and its groups applied. SVG's y axis points down; it is turned up here, so the
  picture keeps its look. One SVG user unit is one chosen unit.
"""
from __future__ import annotations

import csv
import io
import math
import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .shapes import Polygon

UNITS = {"m": 1.0, "mm": 1.0e-3, "cm": 1.0e-2, "in": 0.0254, "ft": 0.3048}
FORMATS = ("csv", "dxf", "svg")
#: The scenario file takes at most this many points per polygon.
MAX_POINTS = 20000
#: Curves are cut into pieces whose chord is within this fraction of the drawing's size.
FLATTEN_FRACTION = 1.0e-4
#: Pieces per Bezier or arc segment of an SVG path.
SVG_CURVE_PIECES = 24


class ContourError(ValueError):
    """A contour file was refused; the message names the file, the contour and what is allowed."""


@dataclass(frozen=True)
class Contour:
    """A closed contour in file units (the first point is not repeated at the end) and where it came from."""

    points: tuple[tuple[float, float], ...]
    where: str


# ----------------------------------------------------------------------------- checks

def _segments_cross(points: np.ndarray) -> tuple[int, int] | None:
    """(i, j) of two non-adjacent edges of the closed polygon that touch or cross, else None."""
    a = points
    b = np.roll(points, -1, axis=0)
    n = len(a)
    for i in range(n - 2):
        j = np.arange(i + 2, n if i > 0 else n - 1)  # edge n-1 is adjacent to edge 0
        if j.size == 0:
            continue
        p, r = a[i], b[i] - a[i]
        q, s = a[j], b[j] - a[j]
        rxs = r[0] * s[:, 1] - r[1] * s[:, 0]
        qp = q - p
        qpxr = qp[:, 0] * r[1] - qp[:, 1] * r[0]
        with np.errstate(divide="ignore", invalid="ignore"):
            t = (qp[:, 0] * s[:, 1] - qp[:, 1] * s[:, 0]) / rxs
            u = qpxr / rxs
        hit = (rxs != 0) & (t >= 0) & (t <= 1) & (u >= 0) & (u <= 1)
        # collinear overlapping pieces
        col = (rxs == 0) & (qpxr == 0)
        if col.any():
            rr = float(r @ r) or 1.0
            t0 = (qp @ r) / rr
            t1 = t0 + (s @ r) / rr
            overlap = (np.minimum(t0, t1) <= 1) & (np.maximum(t0, t1) >= 0)
            hit |= col & overlap
        if hit.any():
            return i, int(j[np.argmax(hit)])
    return None


def _fmt_point(p, unit: str) -> str:
    return f"({p[0]:.6g}, {p[1]:.6g}) {unit}"


def close_and_check(points: list[tuple[float, float]], where: str, unit: str, close: bool = False,
                    tolerance: float | None = None) -> Contour:
    """A checked closed Contour from a point list in file units; raises ContourError for an empty, open,
    degenerate or self-crossing contour. `close` joins an open contour's ends with a straight piece."""
    pts = [(float(x), float(y)) for x, y in points]
    if not pts:
        raise ContourError(f"{where} is empty: it has no points")
    arr = np.array(pts)
    if not np.all(np.isfinite(arr)):
        raise ContourError(f"{where} has a point that is not a finite number")
    size = float(np.ptp(arr, axis=0).max()) if len(arr) > 1 else 0.0
    tol = tolerance if tolerance is not None else 1.0e-9 * max(size, 1e-300)
    # drop repeated consecutive points
    keep = [pts[0]]
    for p in pts[1:]:
        if math.dist(p, keep[-1]) > tol:
            keep.append(p)
    if len(keep) > 1 and math.dist(keep[0], keep[-1]) <= tol:
        keep.pop()
    elif len(keep) > 2 and not close:
        gap = math.dist(keep[0], keep[-1])
        raise ContourError(f"{where} is open: its first point {_fmt_point(keep[0], unit)} and last point "
                           f"{_fmt_point(keep[-1], unit)} are {gap:.6g} {unit} apart; a wall must be a closed "
                           "contour: repeat the first point at the end, close it in the drawing, or ask for "
                           "closing on import")
    if len(keep) < 3:
        raise ContourError(f"{where} has {len(keep)} distinct point(s): a closed contour needs at least 3")
    a = np.array(keep)
    cross = _segments_cross(a)
    if cross is not None:
        i, j = cross
        raise ContourError(f"{where} crosses itself: the piece from {_fmt_point(a[i], unit)} meets the piece from "
                           f"{_fmt_point(a[j], unit)}; a wall contour must not cross itself (split it into "
                           "separate closed contours)")
    area2 = float(np.sum(a[:, 0] * np.roll(a[:, 1], -1) - np.roll(a[:, 0], -1) * a[:, 1]))
    if abs(area2) <= 1e-12 * size * size:
        raise ContourError(f"{where} encloses no area: its points lie on one line")
    if len(keep) > MAX_POINTS:
        raise ContourError(f"{where} has {len(keep)} points, more than {MAX_POINTS} allowed in a scenario; "
                           "simplify it in the drawing")
    return Contour(tuple(keep), where)


# ----------------------------------------------------------------------------- CSV

def read_csv(text: str, name: str, unit: str, close: bool = False) -> list[Contour]:
    groups: list[list[tuple[float, float]]] = [[]]
    starts: list[int] = [1]
    for n, row in enumerate(csv.reader(io.StringIO(text)), start=1):
        cells = [c.strip() for c in row]
        if not cells or all(c == "" for c in cells):
            if groups[-1]:
                groups.append([])
                starts.append(n + 1)
            continue
        if cells[0].startswith("#"):
            continue
        if len(cells) < 2:
            raise ContourError(f"{name} line {n}: {','.join(row)!r} is not allowed: needs two numbers, x and r")
        try:
            x, y = float(cells[0]), float(cells[1])
        except ValueError:
            if n == 1 or not any(groups):  # a header line
                continue
            raise ContourError(f"{name} line {n}: {','.join(row)!r} is not allowed: x and r must be numbers") from None
        if not groups[-1]:
            starts[-1] = n
        groups[-1].append((x, y))
    found = [(g, s) for g, s in zip(groups, starts) if g]
    if not found:
        raise ContourError(f"{name} is empty: no lines with two numbers x, r")
    return [close_and_check(g, f"{name}: contour {k} (from line {s})", unit, close)
            for k, (g, s) in enumerate(found, start=1)]


# ----------------------------------------------------------------------------- DXF

DXF_TYPES = ("LWPOLYLINE", "POLYLINE", "SPLINE", "CIRCLE", "ELLIPSE")


def read_dxf(path: Path, unit: str, close: bool = False) -> list[Contour]:
    try:
        import ezdxf
        from ezdxf import path as dxf_path
    except ImportError:
        raise ContourError("DXF import needs ezdxf, which is not installed: pip install 'shockslate[design]'") from None
    try:
        doc = ezdxf.readfile(str(path))
    except OSError as err:
        raise ContourError(f"{path.name} cannot be read: {err.strerror or err}") from None
    except ezdxf.DXFError as err:
        raise ContourError(f"{path.name} is not a readable DXF file: {err}") from None
    out: list[Contour] = []
    skipped: dict[str, int] = {}
    for k, entity in enumerate(doc.modelspace(), start=1):
        kind = entity.dxftype()
        if kind not in DXF_TYPES:
            skipped[kind] = skipped.get(kind, 0) + 1
            continue
        p = dxf_path.make_path(entity)
        ctrl = np.array([(v.x, v.y) for v in p.control_vertices()] or [(0.0, 0.0)])
        size = float(np.ptp(ctrl, axis=0).max())
        pts = [(v.x, v.y) for v in p.flattening(max(size * FLATTEN_FRACTION, 1e-12))] if size > 0 else []
        where = f"{path.name}: {kind} #{k} (handle {entity.dxf.handle})"
        out.append(close_and_check(pts, where, unit, close))
    if not out:
        what = ", ".join(f"{n} {t}" for t, n in sorted(skipped.items())) or "no entities"
        raise ContourError(f"{path.name} is empty of contours: found {what} in model space; contours are "
                           + ", ".join(DXF_TYPES) + " (join lines and arcs into a polyline in the drawing)")
    return out


# ----------------------------------------------------------------------------- SVG

_NUM = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_TOKEN = re.compile(rf"([MmZzLlHhVvCcSsQqTtAa])|({_NUM})")
_ARGS = {"M": 2, "L": 2, "H": 1, "V": 1, "C": 6, "S": 4, "Q": 4, "T": 2, "A": 7, "Z": 0}


def _affine(a, b, c, d, e, f) -> np.ndarray:
    return np.array([[a, c, e], [b, d, f], [0.0, 0.0, 1.0]])


def _parse_transform(text: str, where: str) -> np.ndarray:
    m = np.eye(3)
    for name, args in re.findall(r"(\w+)\s*\(([^)]*)\)", text or ""):
        v = [float(x) for x in re.findall(_NUM, args)]
        if name == "matrix" and len(v) == 6:
            t = _affine(*v)
        elif name == "translate" and len(v) in (1, 2):
            t = _affine(1, 0, 0, 1, v[0], v[1] if len(v) == 2 else 0.0)
        elif name == "scale" and len(v) in (1, 2):
            t = _affine(v[0], 0, 0, v[1] if len(v) == 2 else v[0], 0, 0)
        elif name == "rotate" and len(v) in (1, 3):
            a = math.radians(v[0])
            t = _affine(math.cos(a), math.sin(a), -math.sin(a), math.cos(a), 0, 0)
            if len(v) == 3:
                t = _affine(1, 0, 0, 1, v[1], v[2]) @ t @ _affine(1, 0, 0, 1, -v[1], -v[2])
        elif name == "skewX" and len(v) == 1:
            t = _affine(1, 0, math.tan(math.radians(v[0])), 1, 0, 0)
        elif name == "skewY" and len(v) == 1:
            t = _affine(1, math.tan(math.radians(v[0])), 0, 1, 0, 0)
        else:
            raise ContourError(f"{where}: transform {name}({args}) is not allowed: use matrix, translate, scale, "
                               "rotate, skewX or skewY with their numbers")
        m = m @ t
    return m


def _arc_points(p0, rx, ry, phi_deg, large, sweep, p1, pieces):
    """Points (excluding p0) of an SVG elliptical arc, by the endpoint-to-centre conversion of the SVG 1.1
    specification (implementation notes, F.6.5 and F.6.6)."""
    if rx == 0 or ry == 0 or p0 == p1:
        return [p1]
    rx, ry = abs(rx), abs(ry)
    phi = math.radians(phi_deg)
    cp, sp = math.cos(phi), math.sin(phi)
    dx2, dy2 = (p0[0] - p1[0]) / 2, (p0[1] - p1[1]) / 2
    x1p, y1p = cp * dx2 + sp * dy2, -sp * dx2 + cp * dy2
    lam = (x1p / rx) ** 2 + (y1p / ry) ** 2
    if lam > 1:
        rx, ry = rx * math.sqrt(lam), ry * math.sqrt(lam)
    num = rx * rx * ry * ry - rx * rx * y1p * y1p - ry * ry * x1p * x1p
    den = rx * rx * y1p * y1p + ry * ry * x1p * x1p
    coef = math.sqrt(max(num / den, 0.0)) if den else 0.0
    if large == sweep:
        coef = -coef
    cxp, cyp = coef * rx * y1p / ry, -coef * ry * x1p / rx
    cx = cp * cxp - sp * cyp + (p0[0] + p1[0]) / 2
    cy = sp * cxp + cp * cyp + (p0[1] + p1[1]) / 2

    def ang(ux, uy, vx, vy):
        a = math.atan2(ux * vy - uy * vx, ux * vx + uy * vy)
        return a

    th1 = ang(1, 0, (x1p - cxp) / rx, (y1p - cyp) / ry)
    dth = ang((x1p - cxp) / rx, (y1p - cyp) / ry, (-x1p - cxp) / rx, (-y1p - cyp) / ry)
    if not sweep and dth > 0:
        dth -= 2 * math.pi
    elif sweep and dth < 0:
        dth += 2 * math.pi
    out = []
    for k in range(1, pieces + 1):
        t = th1 + dth * k / pieces
        out.append((cx + rx * math.cos(t) * cp - ry * math.sin(t) * sp, cy + rx * math.cos(t) * sp + ry * math.sin(t) * cp))
    out[-1] = p1
    return out


def _path_subpaths(d: str, where: str) -> list[tuple[list[tuple[float, float]], bool]]:
    """(points, closed-by-Z) for each subpath of an SVG path's d attribute."""
    tokens = _TOKEN.findall(d or "")
    rest = _TOKEN.sub("", d or "").replace(",", " ").strip()
    if rest:
        raise ContourError(f"{where}: path data {rest[:30]!r} is not allowed: not part of the SVG path grammar")
    subs: list[tuple[list, bool]] = []
    cur: list[tuple[float, float]] = []
    pos = (0.0, 0.0)
    start = pos
    last_ctrl = None
    cmd = None
    k = 0
    n = len(tokens)
    pieces = SVG_CURVE_PIECES

    def take(count):
        nonlocal k
        vals = []
        for _ in range(count):
            if k >= n or tokens[k][1] == "":
                raise ContourError(f"{where}: command {cmd!r} needs {count} numbers")
            vals.append(float(tokens[k][1]))
            k += 1
        return vals

    while k < n:
        if tokens[k][0]:
            cmd = tokens[k][0]
            k += 1
        elif cmd is None:
            raise ContourError(f"{where}: path data must start with a move command (M or m)")
        up = cmd.upper()
        rel = cmd.islower()
        if up == "Z":
            if cur:
                subs.append((cur, True))
            cur = []
            pos = start
            last_ctrl = None
            cmd = None
            continue
        v = take(_ARGS[up])
        ox, oy = pos if rel else (0.0, 0.0)
        if up == "M":
            if cur:
                subs.append((cur, False))
            pos = (ox + v[0], oy + v[1])
            start = pos
            cur = [pos]
            cmd = "l" if rel else "L"  # further pairs are lines
            last_ctrl = None
            continue
        if not cur:
            cur = [pos]
        if up == "L":
            pos = (ox + v[0], oy + v[1])
            cur.append(pos)
            last_ctrl = None
        elif up == "H":
            pos = ((pos[0] if rel else 0.0) + v[0], pos[1])
            cur.append(pos)
            last_ctrl = None
        elif up == "V":
            pos = (pos[0], (pos[1] if rel else 0.0) + v[0])
            cur.append(pos)
            last_ctrl = None
        elif up in ("C", "S"):
            if up == "C":
                c1 = (ox + v[0], oy + v[1])
                c2, end = (ox + v[2], oy + v[3]), (ox + v[4], oy + v[5])
            else:
                c1 = (2 * pos[0] - last_ctrl[0], 2 * pos[1] - last_ctrl[1]) if last_ctrl and last_ctrl[2] == "c" else pos
                c2, end = (ox + v[0], oy + v[1]), (ox + v[2], oy + v[3])
            p0 = pos
            for j in range(1, pieces + 1):
                t = j / pieces
                a, b, c, e = (1 - t) ** 3, 3 * t * (1 - t) ** 2, 3 * t * t * (1 - t), t ** 3
                cur.append((a * p0[0] + b * c1[0] + c * c2[0] + e * end[0], a * p0[1] + b * c1[1] + c * c2[1] + e * end[1]))
            pos = end
            last_ctrl = (c2[0], c2[1], "c")
        elif up in ("Q", "T"):
            if up == "Q":
                c1, end = (ox + v[0], oy + v[1]), (ox + v[2], oy + v[3])
            else:
                c1 = (2 * pos[0] - last_ctrl[0], 2 * pos[1] - last_ctrl[1]) if last_ctrl and last_ctrl[2] == "q" else pos
                end = (ox + v[0], oy + v[1])
            p0 = pos
            for j in range(1, pieces + 1):
                t = j / pieces
                a, b, c = (1 - t) ** 2, 2 * t * (1 - t), t * t
                cur.append((a * p0[0] + b * c1[0] + c * end[0], a * p0[1] + b * c1[1] + c * end[1]))
            pos = end
            last_ctrl = (c1[0], c1[1], "q")
        elif up == "A":
            end = (ox + v[5], oy + v[6])
            cur.extend(_arc_points(pos, v[0], v[1], v[2], bool(v[3]), bool(v[4]), end, pieces))
            pos = end
            last_ctrl = None
    if cur:
        subs.append((cur, False))
    return subs


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


def read_svg(text: str, name: str, unit: str, close: bool = False) -> list[Contour]:
    try:
        root = ET.fromstring(text)
    except ET.ParseError as err:
        raise ContourError(f"{name} is not a readable SVG file: {err}") from None
    if _local(root.tag) != "svg":
        raise ContourError(f"{name} is not allowed: its root element is <{_local(root.tag)}>, not <svg>")
    out: list[Contour] = []
    counter = {"path": 0, "polygon": 0, "polyline": 0}

    def walk(el, m):
        tag = _local(el.tag)
        ident = el.get("id")
        where0 = f"{name}: <{tag}{' id=' + repr(ident) if ident else ''}>"
        m = m @ _parse_transform(el.get("transform", ""), where0)
        if tag in counter:
            counter[tag] += 1
            where = f"{name}: <{tag}> #{counter[tag]}" + (f" (id {ident!r})" if ident else "")
            if tag == "path":
                subs = _path_subpaths(el.get("d", ""), where)
            else:
                nums = [float(x) for x in re.findall(_NUM, el.get("points", ""))]
                subs = [(list(zip(nums[0::2], nums[1::2])), tag == "polygon")]
            if not subs:
                raise ContourError(f"{where} is empty: it has no points")
            for s, (pts, closed) in enumerate(subs, start=1):
                if pts:
                    a = np.c_[np.array(pts), np.ones(len(pts))] @ m.T
                    pts = [(float(x), -float(y)) for x, y in a[:, :2]]  # SVG's y points down: turn it up
                label = where if len(subs) == 1 else f"{where}, subpath {s}"
                out.append(close_and_check(pts, label, unit, close or closed))
        for child in el:
            if _local(child.tag) not in ("defs", "clipPath", "mask", "symbol", "marker", "pattern"):
                walk(child, m)

    walk(root, np.eye(3))
    if not out:
        raise ContourError(f"{name} is empty of contours: no <path>, <polygon> or <polyline> elements")
    return out


# ----------------------------------------------------------------------------- import

def import_contours(path: str | Path, units: str, mirror: bool = False, close: bool = False,
                    fmt: str | None = None) -> list[Polygon]:
    """Wall polygons (metres) from a CSV, DXF or SVG file; `units` is the unit of the file's numbers.

    mirror adds each polygon reflected about y = 0 right after it. Raises ContourError naming the file, the
    contour and what is wrong.
    """
    p = Path(path)
    if units not in UNITS:
        raise ContourError(f"units = {units!r} is not allowed: must be one of " + ", ".join(UNITS))
    kind = (fmt or p.suffix.lstrip(".")).lower()
    if kind not in FORMATS:
        raise ContourError(f"file {p.name!r} is not allowed: the format must be one of " + ", ".join(FORMATS)
                           + " (by its extension, or named)")
    if kind == "dxf":
        contours = read_dxf(p, units, close)
    else:
        try:
            text = p.read_text(encoding="utf-8-sig")
        except OSError as err:
            raise ContourError(f"{p.name} cannot be read: {err.strerror}") from None
        except UnicodeDecodeError:
            raise ContourError(f"{p.name} is not allowed: it is not UTF-8 text") from None
        contours = (read_csv if kind == "csv" else read_svg)(text, p.name, units, close)
    scale = UNITS[units]
    shapes: list[Polygon] = []
    for c in contours:
        pts = tuple((x * scale, y * scale) for x, y in c.points)
        poly = Polygon(pts, "wall")
        shapes.append(poly)
        if mirror:
            shapes.append(poly.mirrored_about_y(0.0))
    return shapes
