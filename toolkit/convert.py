"""`lacuna convert`: DXF -> SVG (chosen layers), SVG -> DXF (closed paths), DXF -> DXF in another length unit.

- DXF -> SVG draws with ezdxf's drawing add-on and its SVG back end, sized in millimetres at 1:1 (or 1:N).
  Each layer becomes a group; a ``metadata`` element records the exact map from SVG coordinates back to the
  drawing (unit and affine), so an SVG made here converts back to the drawing's own coordinates.
- SVG -> DXF turns every closed path, rect, circle, ellipse and polygon into a closed LWPOLYLINE (or a CIRCLE),
  keeping circular arcs as bulges. Circular arcs are recognised as SVG arc commands with rx == ry, and as
  cubic Béziers that are the standard approximation of an arc (control arms 4/3 tan(sweep/4) r along the
  tangents), which is how most programs, ezdxf's drawing add-on among them, write arcs. Anything else curved is
  flattened to within ``chord_mm``. Open paths are left out (listed in ``messages``).
- DXF -> DXF changes the length unit: model space is scaled about the origin and $INSUNITS set together.

The functions return the new file's content; writing it (atomically) is the caller's job.
"""

from __future__ import annotations

import math
import os
import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass
from pathlib import Path

import ezdxf
import numpy as np
from ezdxf import bbox
from ezdxf.addons.drawing import Frontend, RenderContext, layout as draw_layout, svg as draw_svg
from ezdxf.addons.drawing.config import BackgroundPolicy, Configuration
from ezdxf.document import Drawing as DxfDocument
from ezdxf.lldxf import const
from ezdxf.math import Matrix44

from .dxf_in.pieces import ENTITY_DATA_ERRORS
from .dxf_out import dxf_version_code, serialise
from .errors import LacunaError
from .units import INSUNITS_TO_UNIT, MM_PER_UNIT, UNIT_TO_INSUNITS, mm_per

SVG_NS = "http://www.w3.org/2000/svg"
LACUNA_NS = "urn:lacuna:svg:drawing:1"
DEFAULT_LAYER = "0"
# SVG coordinates are written as integers (ezdxf's SVG back end): mapping the drawing's extent onto 1e15 keeps
# a resolution of 1e-15 of the extent, far below 1e-6 of a drawing unit, and below 2**53 where doubles
# stop holding every integer.
COORDINATE_SPACE = 1e15
PAGE_MARGIN_MM = 5.0
# CSS absolute units in mm (CSS Values and Units Level 3, section 6.2: 1in = 96px = 2.54cm = 72pt = 6pc).
CSS_MM = {"mm": 1.0, "cm": 10.0, "in": 25.4, "px": 25.4 / 96.0, "pt": 25.4 / 72.0, "pc": 25.4 / 6.0, "q": 0.25}

ET.register_namespace("lacuna", LACUNA_NS)


# --------------------------------------------------------------------------------------------- dispatch


def convert(in_path, out_path, *, layers: list[str] | None = None, units: str | None = None,
            scale: float = 1.0, messages: list[str] | None = None) -> bytes:
    """``lacuna convert IN OUT``: the content of OUT (bytes), chosen by the two file suffixes."""
    src, dst = Path(in_path), Path(out_path)
    kinds = (src.suffix.lower(), dst.suffix.lower())
    where = str(src)
    if src.resolve() == dst.resolve():
        raise LacunaError("the output would overwrite the input.", where=str(dst),
                          hint="Name another output file; lacuna never modifies the files it is given.")
    if kinds == (".dxf", ".svg"):
        if units is not None:
            raise LacunaError("--units changes a DXF drawing's unit; an SVG is always sized in millimetres.",
                              where=where, hint="Leave out --units, or convert to a .dxf file.")
        return dxf_to_svg(_open(src), layers=layers, scale=scale, where=where).encode("utf-8")
    if kinds == (".svg", ".dxf"):
        text = _read_text(src)
        return svg_to_dxf(text, layers=layers, unit=units, where=where, messages=messages)
    if kinds == (".dxf", ".dxf"):
        if layers:
            raise LacunaError("--layers picks what to draw in an SVG; a unit change scales the whole drawing.",
                              where=where, hint="Leave out --layers.")
        if units is None:
            raise LacunaError("converting DXF to DXF changes its length unit, and no --units was given.",
                              where=where, hint=f"Add --units with one of {', '.join(MM_PER_UNIT)}.")
        return change_units(_open(src), units, where=where, messages=messages)
    raise LacunaError(
        f"cannot convert {src.suffix or 'a file without suffix'} to {dst.suffix or 'a file without suffix'}.",
        where=f"{src} -> {dst}",
        hint="Convert .dxf to .svg, .svg to .dxf, or .dxf to .dxf with --units.",
    )


def _open(path: Path) -> DxfDocument:
    from .dxf_in.source import open_document

    doc, _warnings = open_document(os.fspath(path))
    return doc


def _read_text(path: Path) -> str:
    if not path.is_file():
        raise LacunaError("no such file.", where=str(path), hint="Check the path and the file name.")
    try:
        return path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise LacunaError("the file is not UTF-8 text, so not an SVG file.", where=str(path),
                          hint="Save it again as SVG (UTF-8).") from None


# --------------------------------------------------------------------------------------------- DXF -> SVG


def drawing_unit_mm(doc: DxfDocument) -> tuple[str, float]:
    """The drawing's unit name and mm per unit; unitless is read as mm, as everywhere in lacuna."""
    code = int(doc.header.get("$INSUNITS", 0) or 0)
    unit = INSUNITS_TO_UNIT.get(code, "mm")
    return unit, MM_PER_UNIT[unit]


class _LayerGroups(draw_svg.SVGRenderBackend):
    """ezdxf's SVG render back end, with each drawn element moved into a group of its DXF layer."""

    def __init__(self, page, settings):
        super().__init__(page, settings)
        self.groups: dict[str, ET.Element] = {}

    def _group(self, layer: str) -> ET.Element:
        key = layer.casefold()
        if key not in self.groups:
            group = ET.SubElement(self.entities, "g", id=_svg_id(layer, len(self.groups)))
            group.set(f"{{{LACUNA_NS}}}layer", layer)
            self.groups[key] = group
        return self.groups[key]

    def _move_last(self, properties) -> None:
        last = self.entities[-1] if len(self.entities) else None
        if last is not None and last.tag == "path":
            self.entities.remove(last)
            self._group(properties.layer).append(last)

    def add_strokes(self, d, properties):
        if d:
            super().add_strokes(d, properties)
            self._move_last(properties)

    def add_filling(self, d, properties):
        if d:
            super().add_filling(d, properties)
            self._move_last(properties)


class _Backend(draw_svg.SVGBackend):
    @staticmethod
    def make_backend(page, settings):
        return _LayerGroups(page, settings)


def _damaged(doc: DxfDocument, where: str) -> LacunaError:
    """The error for a drawing the drawing add-on cannot draw: it names the entities whose data is missing or
    not finite."""
    bad = []
    for entity in doc.modelspace():
        try:
            box = bbox.extents([entity], fast=True)
            sound = not box.has_data or np.isfinite([*box.extmin, *box.extmax]).all()
        except ENTITY_DATA_ERRORS:
            sound = False
        if not sound:
            bad.append(f"{entity.dxftype()} {entity.dxf.handle}")
    listed = ", ".join(bad[:10]) + (f" and {len(bad) - 10} more" if len(bad) > 10 else "")
    return LacunaError(
        "the drawing cannot be drawn: it has coordinates that are missing or not finite numbers (a damaged file?)"
        + (f" in {listed}." if bad else "."),
        where=f"{where}, {listed}" if bad else where,
        hint="Redraw or delete those entities, or pick other layers with --layers.",
    )


def _svg_id(layer: str, k: int) -> str:
    # XML ids must start with a letter and hold no spaces; the exact name lives in lacuna:layer.
    slug = re.sub(r"[^a-z0-9_.-]+", "-", layer.casefold()).strip("-")
    return slug if slug and slug[0].isalpha() else f"layer-{k}-{slug}".rstrip("-")


def dxf_to_svg(doc: DxfDocument, *, layers: list[str] | None = None, scale: float = 1.0,
               where: str = "<document>") -> str:
    """Draw ``doc``'s model space (``layers`` only, when given) as SVG text at 1:``scale`` in millimetres."""
    if not (isinstance(scale, (int, float)) and math.isfinite(scale) and scale > 0):
        raise LacunaError(f"the drawing scale 1:N needs a positive N, got {scale!r}.", where="scale")
    unit, mm = drawing_unit_mm(doc)
    ctx = RenderContext(doc)
    if layers:
        known = {layer.dxf.name.casefold(): layer.dxf.name for layer in doc.layers}
        missing = [name for name in layers if name.casefold() not in known]
        if missing:
            raise LacunaError(
                f"the drawing has no layer {', '.join(repr(m) for m in missing)}; it has "
                f"{', '.join(sorted(known.values()))}.",
                where=f"{where}, --layers", hint="Name layers that exist (case does not matter).",
            )
        chosen = {name.casefold() for name in layers}

        def only_chosen(all_layers) -> None:
            for props in all_layers:
                props.is_visible = props.layer.casefold() in chosen

        ctx.set_layer_properties_override(only_chosen)
    backend = _Backend()
    config = Configuration(background_policy=BackgroundPolicy.WHITE)
    try:
        Frontend(ctx, backend, config=config).draw_layout(doc.modelspace(), finalize=True)
    except ENTITY_DATA_ERRORS:
        raise _damaged(doc, where) from None
    page = draw_layout.Page(0, 0, draw_layout.Units.mm, margins=draw_layout.Margins.all(PAGE_MARGIN_MM))
    settings = draw_layout.Settings(fit_page=False, scale=mm / scale, output_coordinate_space=COORDINATE_SPACE)
    drawn = backend.player().bbox()
    if drawn.has_data and not np.isfinite([*drawn.extmin, *drawn.extmax]).all():
        raise _damaged(doc, where)
    root = backend.get_xml_root_element(page, settings=settings) if drawn.has_data else None
    if root is None or backend.transformation_matrix is None or next(root.iter("path"), None) is None:
        chosen_text = f" on the layers {', '.join(layers)}" if layers else ""
        raise LacunaError(f"there is nothing to draw{chosen_text} in model space.", where=where,
                          hint="Choose layers that hold entities in model space.")
    for rect in [child for child in root if child.tag == "rect"]:
        root.remove(rect)  # a transparent sheet: the drawing's colours were already chosen for white paper
    _add_metadata(root, backend.transformation_matrix, unit, scale)
    return ET.tostring(root, encoding="unicode", xml_declaration=True)


def _add_metadata(root: ET.Element, m: Matrix44, unit: str, scale: float) -> None:
    """Record the map SVG -> drawing: x_d = a x + c y + e, y_d = b x + d y + f (SVG matrix order)."""
    forward = np.array([[m[0, 0], m[1, 0], m[3, 0]], [m[0, 1], m[1, 1], m[3, 1]], [0.0, 0.0, 1.0]])
    back = np.linalg.inv(forward)
    a, c, e = back[0]
    b, d, f = back[1]
    meta = ET.Element("metadata")
    info = ET.SubElement(meta, f"{{{LACUNA_NS}}}drawing")
    info.set("unit", unit)
    info.set("scale", f"1:{scale:g}")
    info.set("to-drawing", " ".join(repr(float(v)) for v in (a, b, c, d, e, f)))
    root.insert(0, meta)


# --------------------------------------------------------------------------------------------- SVG -> DXF

# A path segment in its element's coordinates.
@dataclass(frozen=True)
class _Seg:
    kind: str            # "L", "C", "Q", "A"
    pts: tuple           # L: p0, p1; C: p0..p3; Q: p0..p2; A: p0, p1
    arc: tuple = ()      # A: rx, ry, phi_deg, large, sweep


def svg_to_dxf(text: str, *, layers: list[str] | None = None, unit: str | None = None, where: str = "<svg>",
               chord_mm: float = 0.01, dxf_version: str = "R2018", messages: list[str] | None = None) -> bytes:
    """Closed outlines of an SVG as a DXF drawing (bytes) in ``unit`` (default: mm, or the unit recorded by
    :func:`dxf_to_svg`). ``layers`` picks groups by layer name (recorded by :func:`dxf_to_svg`)."""
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
    doc = ezdxf.new(dxf_version_code(dxf_version))
    doc.header["$INSUNITS"] = UNIT_TO_INSUNITS[out_unit]
    doc.header["$MEASUREMENT"] = 0 if out_unit in ("in", "ft") else 1
    msp = doc.modelspace()
    for layer, kind, data in shapes:
        if layer not in doc.layers:
            doc.layers.add(layer)
        if kind == "circle":
            (cx, cy), r = data
            msp.add_circle((cx, cy), r, dxfattribs={"layer": layer})
        else:
            msp.add_lwpolyline(data, format="xyb", close=True, dxfattribs={"layer": layer})
    return serialise(doc)


def _local(tag: str) -> str:
    return tag.rsplit("}", 1)[-1]


_LENGTH = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([a-zA-Z%]*)\s*$")


def _root_map(root: ET.Element, where: str) -> tuple[np.ndarray, str]:
    """3x3 affine from the root's user units to the source drawing, and that drawing's unit."""
    for meta in root.iter(f"{{{LACUNA_NS}}}drawing"):
        try:
            a, b, c, d, e, f = (float(v) for v in meta.get("to-drawing", "").split())
            unit = meta.get("unit", "mm")
            mm_per(unit)
        except (ValueError, LacunaError):
            raise LacunaError("the SVG's lacuna drawing record is damaged.", where=f"{where}, metadata",
                              hint="Delete the <metadata> element to read the SVG at its printed size.") from None
        return np.array([[a, c, e], [b, d, f], [0.0, 0.0, 1.0]]), unit
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
            pieces.append((_apply(m, seg.pts[0]), flip * math.tan(sweep / 4.0)))
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
    pieces = _merge_arcs(_drop_repeats(pieces))
    circle = _whole_circle(pieces)
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
    arm = 4.0 / 3.0 * math.tan(abs(theta) / 4.0) * r
    u = chord / length

    def turn(v, a):
        return np.array([v[0] * math.cos(a) - v[1] * math.sin(a), v[0] * math.sin(a) + v[1] * math.cos(a)])

    ideal1 = p0 + arm * turn(u, half)
    ideal2 = p3 - arm * turn(u, -half)
    tol = rel_tol * length
    if np.hypot(*(ideal1 - p1)) > tol or np.hypot(*(ideal2 - p2)) > tol:
        return None
    return math.tan(theta / 4.0)


def _flatten_cubic(p: np.ndarray, chord: float) -> list[np.ndarray]:
    # The distance between a cubic and its n-segment polyline is at most 3/4 max|second difference| / n^2
    # (the usual flatness bound for uniform subdivision).
    dd = max(np.hypot(*(p[0] - 2 * p[1] + p[2])), np.hypot(*(p[1] - 2 * p[2] + p[3])))
    n = max(1, int(math.ceil(math.sqrt(0.75 * dd / chord)))) if chord > 0 else 64
    t = np.linspace(0.0, 1.0, n + 1)[:, None]
    pts = ((1 - t) ** 3) * p[0] + 3 * ((1 - t) ** 2) * t * p[1] + 3 * (1 - t) * t * t * p[2] + t ** 3 * p[3]
    pts[0], pts[-1] = p[0], p[3]
    return list(pts)


def _bulge_centre(a: np.ndarray, b: np.ndarray, bulge: float) -> tuple[np.ndarray, float]:
    """Centre and radius of the arc from a to b with the given bulge (DXF convention)."""
    chord = b - a
    length = float(np.hypot(*chord))
    theta = 4.0 * math.atan(bulge)
    r = length / (2.0 * math.sin(abs(theta) / 2.0))
    mid = (a + b) / 2
    normal = np.array([-chord[1], chord[0]]) / length  # left of the chord
    # Distance from the chord's middle to the centre, positive to the left for a counter-clockwise arc.
    h = r * math.cos(theta / 2.0) * (1 if bulge > 0 else -1)
    return mid + normal * h, r


def _merge_arcs(pieces: list[tuple[np.ndarray, float]], rel_tol: float = 1e-7) -> list[tuple[np.ndarray, float]]:
    """Join neighbouring arcs on one circle, turning the same way, into one bulge (sweep under 360 degrees)."""
    n = len(pieces)
    if n < 2:
        return pieces
    out: list[list] = []
    for i, (p, b) in enumerate(pieces):
        nxt = pieces[(i + 1) % n][0]
        if out and b != 0 and out[-1][1] != 0 and (out[-1][1] > 0) == (b > 0):
            a0 = out[-1][0]
            c0, r0 = _bulge_centre(a0, p, out[-1][1])
            c1, r1 = _bulge_centre(p, nxt, b)
            total = 4 * math.atan(out[-1][1]) + 4 * math.atan(b)
            if abs(r0 - r1) <= rel_tol * r0 and np.hypot(*(c0 - c1)) <= rel_tol * r0 and \
                    abs(total) < 2 * math.pi * (1 - 1e-9):
                out[-1][1] = math.tan(total / 4.0)
                continue
        out.append([p, b])
    return [(p, b) for p, b in out]


def _whole_circle(pieces, rel_tol: float = 1e-7):
    """((cx, cy), r) when every piece is an arc of one circle turning one way, else None."""
    if len(pieces) < 2 or any(b == 0 for _, b in pieces) or len({b > 0 for _, b in pieces}) != 1:
        return None
    n = len(pieces)
    circles = [_bulge_centre(pieces[i][0], pieces[(i + 1) % n][0], pieces[i][1]) for i in range(n)]
    (c, r) = circles[0]
    if all(abs(ri - r) <= rel_tol * r and np.hypot(*(ci - c)) <= rel_tol * r for ci, ri in circles[1:]):
        total = sum(4 * math.atan(b) for _, b in pieces)
        if abs(abs(total) - 2 * math.pi) < 1e-6:
            return (float(c[0]), float(c[1])), float(r)
    return None


# --------------------------------------------------------------------------------------------- DXF -> DXF


def change_units(doc: DxfDocument, unit: str, *, where: str = "<document>",
                 messages: list[str] | None = None) -> bytes:
    """The drawing in ``unit``: model space scaled about the origin and $INSUNITS set, as DXF bytes.

    The scale is the exact ratio of the two units (1 in = 25.4 mm exactly, the international yard and pound
    of 1959). Line-type, dimension and text sizes in the header and dimension styles scale with it, and each
    paper-space viewport looks at the same part of the model. Paper-space geometry and block definitions are
    left as they are (block references scale their contents).
    """
    notes = messages if messages is not None else []
    target_mm = mm_per(unit, where=f"{where}, --units")
    if doc.dxfversion <= const.DXF12:
        raise LacunaError("a DXF R12 drawing cannot record its length unit ($INSUNITS came with R2000).",
                          where=where, hint="Save the drawing as DXF R2000 or later first.")
    code = int(doc.header.get("$INSUNITS", 0) or 0)
    if code not in INSUNITS_TO_UNIT:
        said = "unitless ($INSUNITS = 0)" if code == 0 else f"in a unit lacuna does not read ($INSUNITS = {code})"
        raise LacunaError(
            f"the drawing is {said}, so there is nothing to convert from.", where=f"{where}, header $INSUNITS",
            hint=f"Set the drawing's units ({', '.join(f'{c} = {u}' for u, c in UNIT_TO_INSUNITS.items())}) "
            "in the drafting program, then convert.",
        )
    source = INSUNITS_TO_UNIT[code]
    factor = MM_PER_UNIT[source] / target_mm
    if factor != 1.0:
        _scale_document(doc, factor, where, notes)
    doc.header["$INSUNITS"] = UNIT_TO_INSUNITS[unit]
    doc.header["$MEASUREMENT"] = 0 if unit in ("in", "ft") else 1
    return serialise(doc)


_HEADER_POINTS = ("$EXTMIN", "$EXTMAX", "$LIMMIN", "$LIMMAX", "$INSBASE")
_HEADER_SIZES = ("$LTSCALE", "$TEXTSIZE", "$DIMSCALE")


def _scale_document(doc: DxfDocument, factor: float, where: str, notes: list[str]) -> None:
    from ezdxf import transform

    m = Matrix44.scale(factor, factor, factor)
    log = []
    for entity in list(doc.modelspace()):  # one at a time, so a damaged entity is named
        try:
            log += list(transform.inplace([entity], m))
        except ENTITY_DATA_ERRORS as error:
            handle = entity.dxf.get("handle", "?")
            raise LacunaError(
                f"the {entity.dxftype()} {handle} cannot be scaled: its data is incomplete or damaged ({error}).",
                where=f"{where}, entity {handle}", hint="Redraw or delete it in the drafting program and convert again.",
            ) from None
    for entry in log:
        entity = getattr(entry, "entity", None)
        handle = entity.dxf.handle if entity is not None else "?"
        raise LacunaError(
            f"the {entity.dxftype() if entity is not None else 'entity'} {handle} cannot be scaled "
            f"({getattr(entry, 'msg', entry)}).",
            where=f"{where}, entity {handle}", hint="Explode it in the drafting program and convert again.",
        )
    for name in _HEADER_POINTS:
        if name in doc.header:
            doc.header[name] = tuple(float(v) * factor for v in doc.header[name])
    for name in _HEADER_SIZES:
        if name in doc.header:
            doc.header[name] = float(doc.header[name]) * factor
    for style in doc.dimstyles:
        style.dxf.dimscale = float(style.dxf.get("dimscale", 1.0)) * factor
    for paper in doc.layouts:
        if paper.is_modelspace:
            continue
        for vp in paper.query("VIEWPORT"):
            if vp.dxf.get("status", 1) == 1:
                continue  # the paper-space view of the sheet itself
            vp.dxf.view_center_point = tuple(float(v) * factor for v in vp.dxf.view_center_point)
            vp.dxf.view_height = float(vp.dxf.view_height) * factor
    notes.append(f"{where}: model space scaled by {factor:.12g}.")
