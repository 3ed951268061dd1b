"""SVG -> closed outlines: every closed path, rect, circle, ellipse and polygon of an SVG as a closed run of
(x, y, bulge) vertices (or a circle), in the unit of the drawing it is to become.

Circular arcs are kept as bulges. They are recognised as SVG arc commands with rx == ry, and as cubic Béziers
that are the standard approximation of an arc (control arms 4/3 tan(sweep/4) r along the tangents), which is how
most programs, ezdxf's drawing add-on among them, write arcs. Anything else curved is flattened to within
``chord_mm``. Open paths are left out (counted in ``messages``).
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass

import numpy as np

from ..arcs import bulge_of, merge_arcs, whole_circle
from ..errors import LacunaError
from ..units import mm_per
from .record import LACUNA_NS, read_record

DEFAULT_LAYER = "0"
# CSS absolute units in mm (CSS Values and Units Level 3, section 6.2: 1in = 96px = 2.54cm = 72pt = 6pc).
CSS_MM = {"mm": 1.0, "cm": 10.0, "in": 25.4, "px": 25.4 / 96.0, "pt": 25.4 / 72.0, "pc": 25.4 / 6.0, "q": 0.25}


# A path segment in its element's coordinates.
@dataclass(frozen=True)
class _Seg:
    kind: str            # "L", "C", "Q", "A"
    pts: tuple           # L: p0, p1; C: p0..p3; Q: p0..p2; A: p0, p1
    arc: tuple = ()      # A: rx, ry, phi_deg, large, sweep


def read_outlines(text: str, *, layers: list[str] | None = None, unit: str | None = None, where: str = "<svg>",
                  chord_mm: float = 0.01,
                  messages: list[str] | None = None) -> tuple[list[tuple[str, str, object]], str]:
    """The closed outlines of an SVG: ([(layer, "circle", ((cx, cy), r)) or (layer, "polyline", [(x, y, bulge),
    ...]), ...], their unit), in ``unit`` (default: mm, or the unit recorded by :mod:`toolkit.convert.svg_draw`).
    ``layers`` picks groups by layer name (as recorded); open paths are left out and counted in ``messages``."""
    notes = messages if messages is not None else []
    try:
        root = ET.fromstring(text)
    except ET.ParseError as error:
        raise LacunaError(f"the file is not well-formed XML, so not an SVG file ({error}).", where=where,
                          hint="Save it again as SVG from the program that made it.") from None
    if _local(root.tag) != "svg":
        raise LacunaError(f"the file is XML but its root element is <{_local(root.tag)}>, not <svg>.", where=where,
                          hint="Convert an SVG file.")
    to_source, source_unit = _root_map(root, where)
    out_unit = unit or source_unit
    k = mm_per(source_unit) / mm_per(out_unit, where=f"{where}, --units")
    base = np.diag([k, k, 1.0]) @ to_source
    chord = chord_mm / mm_per(out_unit)
    chosen = {name.casefold() for name in layers} if layers else None

    shapes: list[tuple[str, str, object]] = []  # (layer, kind, data)
    seen_layers: set[str] = set()
    open_count = 0
    for element, matrix, layer in _walk(root, base, DEFAULT_LAYER):
        seen_layers.add(layer)
        if chosen is not None and layer.casefold() not in chosen:
            continue
        name = _local(element.tag)
        circle = _as_circle(element, name, matrix)
        if circle is not None:
            shapes.append((layer, "circle", circle))
            continue
        for segments, closed in _subpaths(element, name, where):
            if not closed:
                open_count += 1
                continue
            shapes.append((layer, *_outline(segments, matrix, chord)))
    if open_count:
        notes.append(f"{where}: {open_count} open path(s) left out (only closed outlines are converted).")
    if chosen is not None:
        missing = sorted(name for name in layers if name.casefold() not in {s.casefold() for s in seen_layers})
        if missing:
            raise LacunaError(
                f"the SVG has no layer group {', '.join(repr(m) for m in missing)}; it has "
                f"{', '.join(sorted(seen_layers)) or 'none'}.", where=f"{where}, --layers",
                hint="Name layers recorded in the SVG, or leave out --layers.",
            )
    if not shapes:
        raise LacunaError(
            "the SVG has no closed paths to convert" + (f" on the layers {', '.join(layers)}" if layers else "")
            + ".", where=where,
            hint="Close the outlines in the SVG (a path ending in Z, or a rect, circle, ellipse or polygon).",
        )
    return shapes, out_unit


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


_LENGTH = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([a-zA-Z%]*)\s*$")


def _root_map(root: ET.Element, where: str) -> tuple[np.ndarray, str]:
    """3x3 affine from the root's user units to the source drawing, and that drawing's unit."""
    recorded = read_record(root, where)
    if recorded is not None:
        return recorded
    view = root.get("viewBox")
    vb = None
    if view:
        try:
            vb = [float(v) for v in re.split(r"[\s,]+", view.strip())]
        except ValueError:
            vb = None
        if vb is None or len(vb) != 4 or vb[2] <= 0 or vb[3] <= 0:
            raise LacunaError(f"the SVG's viewBox {view!r} is not four numbers with a positive size.",
                              where=f"{where}, viewBox", hint="Fix or remove the viewBox attribute.")
    sizes = [_css_mm(root.get(attr), where, attr) for attr in ("width", "height")]
    if vb is None:
        kx = ky = CSS_MM["px"]  # user units are CSS pixels
        x0, y0 = 0.0, 0.0
        height_user = (sizes[1] / ky) if sizes[1] else 0.0
    else:
        x0, y0, w, h = vb
        kx = sizes[0] / w if sizes[0] else None
        ky = sizes[1] / h if sizes[1] else None
        k = kx or ky or CSS_MM["px"]  # no physical size: user units taken as CSS pixels
        # The default preserveAspectRatio (xMidYMid meet) keeps one scale: the smaller.
        kx = ky = min(v for v in (kx, ky, k) if v)
        height_user = h
    # SVG y runs down from the top; DXF y runs up: the bottom of the view goes to y = 0.
    return np.array([[kx, 0.0, -x0 * kx], [0.0, -ky, (y0 + height_user) * ky], [0.0, 0.0, 1.0]]), "mm"


def _css_mm(value: str | None, where: str, attr: str) -> float | None:
    if value is None:
        return None
    m = _LENGTH.match(value)
    if not m or (m.group(2) and m.group(2).lower() not in CSS_MM):
        if m and m.group(2) == "%":
            return None
        raise LacunaError(f"the SVG's {attr} {value!r} is not a length.", where=f"{where}, {attr}",
                          hint=f"Give it in one of {', '.join(CSS_MM)}.")
    return float(m.group(1)) * CSS_MM[(m.group(2) or "px").lower()]


_SKIP = {"defs", "metadata", "title", "desc", "style", "clipPath", "mask", "symbol", "pattern", "marker",
         "linearGradient", "radialGradient", "filter", "text", "image", "foreignObject", "script"}
_SHAPES = {"path", "rect", "circle", "ellipse", "polygon", "polyline", "line"}


def _walk(element: ET.Element, matrix: np.ndarray, layer: str):
    """(shape element, its 3x3 matrix to output, its layer) for every drawable shape, in document order."""
    for child in element:
        if not isinstance(child.tag, str):
            continue
        name = _local(child.tag)
        if name in _SKIP or child.get("display") == "none":
            continue
        m = matrix @ _transform(child.get("transform", ""))
        if name == "g" or name == "a" or name == "svg":
            yield from _walk(child, m, child.get(f"{{{LACUNA_NS}}}layer", layer))
        elif name in _SHAPES:
            yield child, m, layer


_TRANSFORM = re.compile(r"(matrix|translate|scale|rotate|skewX|skewY)\s*\(([^)]*)\)")
_NUMBER = re.compile(r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?")


def _transform(text: str) -> np.ndarray:
    """An SVG transform list -> 3x3 matrix (SVG 1.1, section 7.6)."""
    m = np.eye(3)
    for name, args in _TRANSFORM.findall(text):
        v = [float(a) for a in _NUMBER.findall(args)]
        if name == "matrix" and len(v) == 6:
            t = np.array([[v[0], v[2], v[4]], [v[1], v[3], v[5]], [0, 0, 1.0]])
        elif name == "translate" and v:
            t = np.array([[1, 0, v[0]], [0, 1, v[1] if len(v) > 1 else 0.0], [0, 0, 1.0]])
        elif name == "scale" and v:
            t = np.diag([v[0], v[1] if len(v) > 1 else v[0], 1.0])
        elif name == "rotate" and v:
            a = math.radians(v[0])
            r = np.array([[math.cos(a), -math.sin(a), 0], [math.sin(a), math.cos(a), 0], [0, 0, 1.0]])
            if len(v) == 3:
                r = _transform(f"translate({v[1]},{v[2]})") @ r @ _transform(f"translate({-v[1]},{-v[2]})")
            t = r
        elif name == "skewX" and v:
            t = np.array([[1, math.tan(math.radians(v[0])), 0], [0, 1, 0], [0, 0, 1.0]])
        elif name == "skewY" and v:
            t = np.array([[1, 0, 0], [math.tan(math.radians(v[0])), 1, 0], [0, 0, 1.0]])
        else:
            continue
        m = m @ t
    return m


def _similarity(m: np.ndarray) -> float | None:
    """The scale of a 3x3 affine that keeps circles circles (rotation, uniform scale, mirror), else None."""
    a = m[:2, :2]
    g = a.T @ a
    s2 = 0.5 * (g[0, 0] + g[1, 1])
    if s2 <= 0 or abs(g[0, 1]) > 1e-12 * s2 or abs(g[0, 0] - g[1, 1]) > 1e-12 * s2:
        return None
    return math.sqrt(s2)


def _num(element: ET.Element, attr: str, default: float = 0.0) -> float:
    value = element.get(attr)
    if value is None:
        return default
    m = _NUMBER.match(value.strip())
    return float(m.group(0)) if m else default


def _as_circle(element: ET.Element, name: str, m: np.ndarray):
    """((cx, cy), r) in output units for a circle (or round ellipse) under a similarity, else None."""
    if name == "circle":
        rx = ry = _num(element, "r")
    elif name == "ellipse":
        rx, ry = _num(element, "rx"), _num(element, "ry")
    else:
        return None
    s = _similarity(m)
    if rx <= 0 or rx != ry or s is None:
        return None
    c = m @ np.array([_num(element, "cx"), _num(element, "cy"), 1.0])
    return (float(c[0]), float(c[1])), rx * s


def _subpaths(element: ET.Element, name: str, where: str) -> list[tuple[list[_Seg], bool]]:
    """The element's outline(s) as segment lists in its own coordinates, each with its closed flag."""
    if name == "path":
        return _parse_path(element.get("d", ""), where)
    if name == "rect":
        x, y, w, h = (_num(element, a) for a in ("x", "y", "width", "height"))
        if w <= 0 or h <= 0:
            return []
        rx, ry = element.get("rx"), element.get("ry")
        rx = _num(element, "rx") if rx is not None else (_num(element, "ry") if ry is not None else 0.0)
        ry = _num(element, "ry") if ry is not None else rx
        rx, ry = min(max(rx, 0.0), w / 2), min(max(ry, 0.0), h / 2)
        if rx == 0 or ry == 0:
            pts = [(x, y), (x + w, y), (x + w, y + h), (x, y + h)]
            return [([_Seg("L", (pts[i], pts[(i + 1) % 4])) for i in range(4)], True)]
        a = (rx, ry, 0.0, 0, 1)
        p = [(x + rx, y), (x + w - rx, y), (x + w, y + ry), (x + w, y + h - ry), (x + w - rx, y + h), (x + rx, y + h),
             (x, y + h - ry), (x, y + ry)]
        segs = []
        for i in range(0, 8, 2):
            segs.append(_Seg("L", (p[i], p[i + 1])))
            segs.append(_Seg("A", (p[i + 1], p[(i + 2) % 8]), a))
        return [(segs, True)]
    if name in ("circle", "ellipse"):
        cx, cy = _num(element, "cx"), _num(element, "cy")
        rx = _num(element, "r") if name == "circle" else _num(element, "rx")
        ry = _num(element, "r") if name == "circle" else _num(element, "ry")
        if rx <= 0 or ry <= 0:
            return []
        a = (rx, ry, 0.0, 0, 1)
        p = [(cx + rx, cy), (cx, cy + ry), (cx - rx, cy), (cx, cy - ry)]
        return [([_Seg("A", (p[i], p[(i + 1) % 4]), a) for i in range(4)], True)]
    if name in ("polygon", "polyline"):
        v = [float(t) for t in _NUMBER.findall(element.get("points", ""))]
        pts = [(v[i], v[i + 1]) for i in range(0, len(v) - 1, 2)]
        if len(pts) < 2:
            return []
        closed = name == "polygon" or pts[0] == pts[-1]
        if name == "polyline" and closed:
            pts = pts[:-1]
        segs = [_Seg("L", (pts[i], pts[i + 1])) for i in range(len(pts) - 1)]
        if closed:
            segs.append(_Seg("L", (pts[-1], pts[0])))
        return [(segs, closed and len(pts) >= 3)]
    return [([], False)]  # a line is never closed


_PATH_TOKEN = re.compile(r"([MmZzLlHhVvCcSsQqTtAa])|([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)")
_ARGS = {"M": 2, "L": 2, "H": 1, "V": 1, "C": 6, "S": 4, "Q": 4, "T": 2, "A": 7, "Z": 0}


def _path_tokens(d: str, where: str) -> list:
    tokens, i = [], 0
    arg_index = 0
    cmd = None
    while i < len(d):
        ch = d[i]
        if ch in " \t\r\n,":
            i += 1
            continue
        # Arc flags are one character each and may be written with nothing between them ("a5 5 0 015 5").
        if cmd is not None and cmd in "Aa" and arg_index % 7 in (3, 4) and ch in "01":
            tokens.append(float(ch))
            i += 1
            arg_index += 1
            continue
        m = _PATH_TOKEN.match(d, i)
        if not m:
            raise LacunaError(f"the path data has an unreadable character {ch!r} at position {i}.",
                              where=f"{where}, path d", hint="Fix the path in the program that made it.")
        if m.group(1):
            cmd = m.group(1)
            tokens.append(cmd)
            arg_index = 0
        else:
            tokens.append(float(m.group(2)))
            arg_index += 1
        i = m.end()
    return tokens


def _parse_path(d: str, where: str) -> list[tuple[list[_Seg], bool]]:
    """SVG path data (SVG 1.1, section 8.3) -> subpaths of absolute segments with their closed flags."""
    tokens = _path_tokens(d, where)
    out: list[tuple[list[_Seg], bool]] = []
    segs: list[_Seg] = []
    cur = start = (0.0, 0.0)
    last_ctrl = None  # for S/T reflection
    last_cmd = ""
    i = 0
    cmd = None

    def flush(closed: bool):
        nonlocal segs
        if segs:
            out.append((segs, closed))
        segs = []

    while i < len(tokens):
        t = tokens[i]
        if isinstance(t, str):
            cmd = t
            i += 1
            if cmd in "Zz":
                if segs and _dist(cur, start) > 0:
                    segs.append(_Seg("L", (cur, start)))
                flush(True)
                cur = start
                last_cmd = "Z"
                continue
        elif cmd is None:
            raise LacunaError("the path data does not start with a command.", where=f"{where}, path d",
                              hint="Path data starts with M.")
        n = _ARGS[cmd.upper()]
        args = tokens[i:i + n]
        if len(args) < n or any(isinstance(a, str) for a in args):
            raise LacunaError(f"path command {cmd} has too few numbers.", where=f"{where}, path d",
                              hint="Fix the path in the program that made it.")
        i += n
        rel = cmd.islower()
        ox, oy = cur if rel else (0.0, 0.0)
        c = cmd.upper()
        if c == "M":
            flush(_returns(segs, start))
            cur = start = (args[0] + ox, args[1] + oy)
            cmd = "l" if rel else "L"  # further pairs are line-tos
            last_ctrl = None
        elif c in "LHV":
            if c == "L":
                p = (args[0] + ox, args[1] + oy)
            elif c == "H":
                p = (args[0] + ox, cur[1])
            else:
                p = (cur[0], args[0] + oy)
            segs.append(_Seg("L", (cur, p)))
            cur, last_ctrl = p, None
        elif c in "CS":
            if c == "C":
                p1 = (args[0] + ox, args[1] + oy)
                rest = args[2:]
            else:
                p1 = _reflect(last_ctrl, cur) if last_cmd in "CS" and last_ctrl else cur
                rest = args
            p2 = (rest[0] + ox, rest[1] + oy)
            p3 = (rest[2] + ox, rest[3] + oy)
            segs.append(_Seg("C", (cur, p1, p2, p3)))
            cur, last_ctrl = p3, p2
        elif c in "QT":
            if c == "Q":
                p1 = (args[0] + ox, args[1] + oy)
                p2 = (args[2] + ox, args[3] + oy)
            else:
                p1 = _reflect(last_ctrl, cur) if last_cmd in "QT" and last_ctrl else cur
                p2 = (args[0] + ox, args[1] + oy)
            segs.append(_Seg("Q", (cur, p1, p2)))
            cur, last_ctrl = p2, p1
        elif c == "A":
            p = (args[5] + ox, args[6] + oy)
            if _dist(cur, p) > 0:
                if args[0] == 0 or args[1] == 0:
                    segs.append(_Seg("L", (cur, p)))
                else:
                    segs.append(_Seg("A", (cur, p), (abs(args[0]), abs(args[1]), args[2], int(args[3] != 0),
                                                     int(args[4] != 0))))
            cur, last_ctrl = p, None
        last_cmd = c
    # A subpath that ends where it began without Z still outlines a closed shape.
    flush(_returns(segs, start))
    return out


def _returns(segs: list[_Seg], start) -> bool:
    """Whether an open subpath ends where it began (within 1e-9 of its size: written coordinates are rounded)."""
    if not segs:
        return False
    pts = np.array([p for seg in segs for p in seg.pts], dtype=float)
    size = float(np.ptp(pts, axis=0).max())
    return size > 0 and _dist(segs[-1].pts[-1], start) <= 1e-9 * size


def _dist(a, b) -> float:
    return math.hypot(a[0] - b[0], a[1] - b[1])


def _reflect(p, about):
    return (2 * about[0] - p[0], 2 * about[1] - p[1])


def _apply(m: np.ndarray, p) -> np.ndarray:
    return m[:2, :2] @ np.asarray(p, dtype=float) + m[:2, 2]


def _outline(segments: list[_Seg], m: np.ndarray, chord: float):
    """Segments in element coordinates -> ("circle", ((cx, cy), r)) or ("polyline", [(x, y, bulge), ...])."""
    s = _similarity(m)
    flip = -1.0 if np.linalg.det(m[:2, :2]) < 0 else 1.0
    pieces: list[tuple[np.ndarray, float]] = []  # (start point in output, bulge to the next piece's start)
    for seg in segments:
        if seg.kind == "L":
            pieces.append((_apply(m, seg.pts[0]), 0.0))
        elif seg.kind == "A" and s is not None and seg.arc[0] == seg.arc[1]:
            sweep = _arc_sweep(seg)
            pieces.append((_apply(m, seg.pts[0]), flip * bulge_of(sweep)))
        elif seg.kind == "A":
            pts = _arc_points(seg, chord / max(np.linalg.norm(m[:2, :2], 2), 1e-300))
            pieces += [(_apply(m, p), 0.0) for p in pts[:-1]]
        else:
            ctrl = np.array([_apply(m, p) for p in seg.pts])
            if seg.kind == "Q":  # degree elevation: the same curve as a cubic
                q0, q1, q2 = ctrl
                ctrl = np.array([q0, q0 + 2 / 3 * (q1 - q0), q2 + 2 / 3 * (q1 - q2), q2])
            bulge = _cubic_as_arc(ctrl)
            if bulge is not None:
                pieces.append((ctrl[0], bulge))
            else:
                pieces += [(p, 0.0) for p in _flatten_cubic(ctrl, chord)[:-1]]
    pieces = merge_arcs(_drop_repeats(pieces))
    circle = whole_circle(pieces)
    if circle is not None:
        return "circle", circle
    return "polyline", [(float(p[0]), float(p[1]), float(b)) for p, b in pieces]


def _drop_repeats(pieces: list[tuple[np.ndarray, float]]) -> list[tuple[np.ndarray, float]]:
    """Leave out zero-length pieces (a point repeated), whose bulge means nothing."""
    if not pieces:
        return pieces
    size = float(np.ptp(np.array([p for p, _ in pieces]), axis=0).max()) or 1.0
    n = len(pieces)
    return [pieces[i] for i in range(n) if np.hypot(*(pieces[i][0] - pieces[(i + 1) % n][0])) > 1e-12 * size] \
        or pieces[:1]


def _arc_centre(seg: _Seg):
    """Centre parametrisation of an SVG arc (SVG 1.1, appendix F.6.5, with radii scaled up per F.6.6)."""
    (x1, y1), (x2, y2) = seg.pts
    rx, ry, phi, large, sweep = seg.arc
    cphi, sphi = math.cos(math.radians(phi)), math.sin(math.radians(phi))
    dx, dy = (x1 - x2) / 2, (y1 - y2) / 2
    x1p, y1p = cphi * dx + sphi * dy, -sphi * dx + cphi * dy
    lam = (x1p / rx) ** 2 + (y1p / ry) ** 2
    if lam > 1:
        rx, ry = rx * math.sqrt(lam), ry * math.sqrt(lam)
    num = rx * rx * ry * ry - rx * rx * y1p * y1p - ry * ry * x1p * x1p
    den = rx * rx * y1p * y1p + ry * ry * x1p * x1p
    coef = math.sqrt(max(num, 0.0) / den) if den > 0 else 0.0
    if large == sweep:
        coef = -coef
    cxp, cyp = coef * rx * y1p / ry, -coef * ry * x1p / rx
    cx = cphi * cxp - sphi * cyp + (x1 + x2) / 2
    cy = sphi * cxp + cphi * cyp + (y1 + y2) / 2

    def angle(ux, uy, vx, vy):
        return math.atan2(ux * vy - uy * vx, ux * vx + uy * vy)

    t1 = angle(1, 0, (x1p - cxp) / rx, (y1p - cyp) / ry)
    dt = angle((x1p - cxp) / rx, (y1p - cyp) / ry, (-x1p - cxp) / rx, (-y1p - cyp) / ry)
    if not sweep and dt > 0:
        dt -= 2 * math.pi
    elif sweep and dt < 0:
        dt += 2 * math.pi
    return (cx, cy), rx, ry, cphi, sphi, t1, dt


def _arc_sweep(seg: _Seg) -> float:
    """Signed sweep (radians) of an SVG arc in its element's coordinates; positive with sweep-flag 1."""
    return _arc_centre(seg)[-1]


def _arc_points(seg: _Seg, chord: float) -> list[tuple[float, float]]:
    (cx, cy), rx, ry, c, s, t1, dt = _arc_centre(seg)
    r = max(rx, ry)
    step = 2 * math.acos(max(-1.0, 1 - chord / r)) if chord < r else math.pi / 2
    n = max(2, int(math.ceil(abs(dt) / max(step, 1e-9))))
    ts = t1 + dt * np.linspace(0.0, 1.0, n + 1)
    pts = [(cx + c * rx * math.cos(t) - s * ry * math.sin(t), cy + s * rx * math.cos(t) + c * ry * math.sin(t))
           for t in ts]
    pts[0], pts[-1] = seg.pts  # exact end points
    return pts


def _cubic_as_arc(p: np.ndarray, rel_tol: float = 1e-8) -> float | None:
    """The bulge of the circular arc a cubic Bézier stands for, if it is one's standard approximation, else None.

    For an arc of sweep theta and radius r the control points sit on the end tangents at 4/3 tan(theta/4) r
    from the ends; the tangent at the start makes half the sweep with the chord.
    """
    p0, p1, p2, p3 = p
    chord = p3 - p0
    length = float(np.hypot(*chord))
    t0 = p1 - p0
    if length == 0 or not np.hypot(*t0) > 0:
        return None
    half = math.atan2(chord[0] * t0[1] - chord[1] * t0[0], chord @ t0)  # angle from chord to start tangent
    if not 0 < abs(half) < math.pi / 2:
        return None
    theta = -2.0 * half  # a positive (counter-clockwise) arc starts turned clockwise from its chord
    r = length / (2.0 * math.sin(abs(theta) / 2.0))
    arm = 4.0 / 3.0 * bulge_of(abs(theta)) * r  # the arm of the standard cubic: 4/3 tan(sweep / 4) r
    u = chord / length

    def turn(v, a):
        return np.array([v[0] * math.cos(a) - v[1] * math.sin(a), v[0] * math.sin(a) + v[1] * math.cos(a)])

    ideal1 = p0 + arm * turn(u, half)
    ideal2 = p3 - arm * turn(u, -half)
    tol = rel_tol * length
    if np.hypot(*(ideal1 - p1)) > tol or np.hypot(*(ideal2 - p2)) > tol:
        return None
    return bulge_of(theta)


def _flatten_cubic(p: np.ndarray, chord: float) -> list[np.ndarray]:
    # The distance between a cubic and its n-segment polyline is at most 3/4 max|second difference| / n^2
    # (the usual flatness bound for uniform subdivision).
    dd = max(np.hypot(*(p[0] - 2 * p[1] + p[2])), np.hypot(*(p[1] - 2 * p[2] + p[3])))
    n = max(1, int(math.ceil(math.sqrt(0.75 * dd / chord)))) if chord > 0 else 64
    t = np.linspace(0.0, 1.0, n + 1)[:, None]
    pts = ((1 - t) ** 3) * p[0] + 3 * ((1 - t) ** 2) * t * p[1] + 3 * (1 - t) * t * t * p[2] + t ** 3 * p[3]
    pts[0], pts[-1] = p[0], p[3]
    return list(pts)
