"""Support and load markers drawn on their own layers (CONTRACT.md, "DXF markers").

Support: a POINT (or an INSERT, at its insertion point) anywhere on the panel, or a LINE lying on the
outline. Its fixity, in the panel's local axes, comes from the marker's XDATA, an INSERT's FIX attribute, or
the nearest TEXT/MTEXT on the support layer; "xy" when none is given.

Load: a LINE from the point of application pointing along the force. Its magnitude in kN (and load case)
comes from its XDATA or from the TEXT/MTEXT on the load layer nearest the line's start, no further from it
than the line is long.

XDATA under the application name ``XDATA_APPID`` is a list of key/value pairs, each key a string (group code
1000) followed by its value: ``force_kN`` (1040 real), ``case`` (1000 string), ``fix`` (1000 string).
"""

from __future__ import annotations

import math
import re

import numpy as np
from shapely.geometry import Point

from ..errors import LacunaError
from ..model import PointLoad, Support
from .pieces import ANNOTATION, FARTHEST
from .reading import Reading

XDATA_APPID = "LACUNA"
DEFAULT_CASE = "main"

_FIX = re.compile(r"^\s*(?:fix(?:ed)?\s*[:=]?\s*)?(xy|yx|x|y)\s*$", re.IGNORECASE)
_LOAD = re.compile(
    r"^\s*(?P<num>[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?)\s*(?P<word>[^\W\d_]+)?\s*(?P<rest>.*?)\s*$"
)
# Force units a drafter might write instead of kN: refused rather than read as a load-case name.
_OTHER_FORCE_UNITS = {"n", "mn", "gn", "kgf", "kg", "t", "tf", "lb", "lbs", "lbf", "kip", "kips", "dan"}
_TIE = 1e-9  # relative: two distances this close are "equally near"


def marker_xdata(*, force_kN: float | None = None, case: str | None = None, fix: str | None = None) -> list:
    """XDATA tags for a marker entity, to pass to ``entity.set_xdata(XDATA_APPID, ...)``."""
    tags: list[tuple[int, object]] = []
    if force_kN is not None:
        tags += [(1000, "force_kN"), (1040, float(force_kN))]
    if case is not None:
        tags += [(1000, "case"), (1000, str(case))]
    if fix is not None:
        tags += [(1000, "fix"), (1000, str(fix))]
    return tags


def supports(items, layer: str, width: float, height: float, openings, r: Reading) -> tuple[Support, ...]:
    """Support markers on ``layer`` -> Supports in local mm, sorted by position."""
    markers, texts = [], []
    for item in items:
        kind, e = item.kind, item.entity
        label = f"{kind} {item.handle}"
        if kind == "POINT":
            geom = _rel([e.dxf.location], r, item)
        elif kind == "LINE":
            geom = _rel([e.dxf.start, e.dxf.end], r, item)
        elif kind == "INSERT":
            geom = _rel([e.ocs().to_wcs(e.dxf.insert)], r, item)
        elif kind in ("TEXT", "MTEXT"):
            texts.append((item, _text_position(item, r), _plain(e)))
            continue
        else:
            _not_a_marker(item, r, "a POINT or a LINE on the outline (with an optional TEXT giving the fixity)")
            continue
        fix = _xdata(e, r, layer, label).get("fix")
        if fix is None and kind == "INSERT":
            fix = next((a.dxf.text for a in e.attribs if a.dxf.tag.casefold() == "fix"), None)
        if fix is not None:
            fix = _parse_fix(fix, r, layer, label)
        markers.append({"geom": geom, "fix": fix, "label": label, "texts": []})

    open_markers = [m for m in markers if m["fix"] is None]
    for item, pos, text in texts:
        label = f"{item.kind} {item.handle}"
        if not open_markers:
            r.warnings.append(f"{r.where(layer, [label])}: text {text!r} is not beside any support; ignored.")
            continue
        dist = np.array([_distance_to(pos, m["geom"]) for m in open_markers])
        order = np.argsort(dist)
        if len(order) > 1 and dist[order[1]] - dist[order[0]] <= _TIE * max(dist[order[1]], 1.0):
            a, b = open_markers[order[0]]["label"], open_markers[order[1]]["label"]
            raise LacunaError(
                f"text {text!r} is equally near the supports {a} and {b}, so its fixity belongs to neither.",
                where=r.where(layer, [label, a, b]),
                hint="Move the text next to the support it describes.",
            )
        open_markers[order[0]]["texts"].append((label, _parse_fix(text, r, layer, label)))

    out = []
    for m in markers:
        fix = m["fix"]
        if fix is None and m["texts"]:
            given = {f for _, f in m["texts"]}
            if len(given) > 1:
                labels = [m["label"]] + [lbl for lbl, _ in m["texts"]]
                raise LacunaError(
                    f"support {m['label']} has texts giving different fixities ({', '.join(sorted(given))}).",
                    where=r.where(layer, labels),
                    hint="Keep one fixity text beside each support.",
                )
            fix = given.pop()
        local = r.to_local(m["geom"])
        where = r.where(layer, [m["label"]])
        if len(local) == 2:
            off = max(_off_outline(p, width, height) for p in (*local, local.mean(axis=0)))
            if off > r.join_mm:
                raise LacunaError(
                    f"support line {m['label']} is not on the panel outline (it lies up to {off:.4g} mm from it; "
                    f"the join tolerance is {r.join_mm:g} mm).",
                    where=where,
                    hint="Draw a support line along an edge of the outline, or use a POINT for a support inside.",
                )
        else:
            _check_on_panel(local[0], width, height, r, where, "support", openings)
        pts = tuple((float(x), float(y)) for x, y in _clip(local, width, height))
        out.append(Support(points=pts, fix=fix or "xy", source=where))
    out.sort(key=lambda s: tuple(round(c, 3) for p in s.points for c in p))
    return tuple(out)


def loads(items, layer: str, width: float, height: float, openings, r: Reading) -> tuple[PointLoad, ...]:
    """Load markers on ``layer`` -> point loads in local mm and N, sorted by position."""
    lines, texts = [], []
    for item in items:
        kind, e = item.kind, item.entity
        if kind == "LINE":
            lines.append((item, _rel([e.dxf.start, e.dxf.end], r, item)))
        elif kind in ("TEXT", "MTEXT"):
            texts.append((item, _text_position(item, r), _plain(e)))
        else:
            _not_a_marker(item, r, "a LINE from the point of application along the force, with a TEXT in kN")

    claimed: dict[int, str] = {}
    out = []
    for item, (start, end) in lines:
        label = f"LINE {item.handle}"
        where = r.where(layer, [label])
        length = float(np.hypot(*(end - start)))
        if length * r.mm_per_unit <= r.exact_mm:
            raise LacunaError(
                f"load line {label} has no length, so it shows no direction.",
                where=where,
                hint="Draw the line from the point of application in the direction of the force.",
            )
        data = _xdata(item.entity, r, layer, label)
        if "force_kN" in data:
            kn = _positive_kn(data["force_kN"], r, where, f"XDATA force_kN of {label}")
            case = str(data.get("case") or DEFAULT_CASE)
        else:
            near = [(float(np.hypot(*(pos - start))), k) for k, (_, pos, _) in enumerate(texts)]
            near = sorted((d, k) for d, k in near if d <= length * (1 + _TIE))
            if not near:
                raise LacunaError(
                    f"load line {label} has no magnitude: no TEXT or MTEXT on layer {layer} lies within the "
                    f"line's length ({length * r.mm_per_unit:.4g} mm) of its start {r.fmt(start)}.",
                    where=where,
                    hint='Write the force in kN (e.g. "40 kN") next to the start of the line.',
                )
            if len(near) > 1 and near[1][0] - near[0][0] <= _TIE * max(near[1][0], 1.0):
                t1, t2 = (f"{texts[k][0].kind} {texts[k][0].handle}" for _, k in near[:2])
                raise LacunaError(
                    f"load line {label} has two texts equally near its start ({t1} and {t2}).",
                    where=r.where(layer, [label, t1, t2]),
                    hint="Keep one magnitude text next to the start of each load line.",
                )
            k = near[0][1]
            titem, _, text = texts[k]
            tlabel = f"{titem.kind} {titem.handle}"
            if k in claimed:
                raise LacunaError(
                    f"text {text!r} is the nearest magnitude for two load lines ({claimed[k]} and {label}).",
                    where=r.where(layer, [tlabel, claimed[k], label]),
                    hint="Give each load line its own magnitude text next to its start.",
                )
            claimed[k] = label
            kn, case = _parse_load(text, r, r.where(layer, [tlabel, label]))
        local_start = r.to_local(start)
        _check_on_panel(local_start, width, height, r, where, "load", openings)
        direction = r.vector_to_local((end - start) / length)
        force = direction * kn * 1000.0
        at = _clip(local_start[None, :], width, height)[0]
        out.append(PointLoad(at=(float(at[0]), float(at[1])), force_N=(float(force[0]), float(force[1])),
                             case=case, source=where))
    for k, (titem, _, text) in enumerate(texts):
        if k not in claimed:
            r.warnings.append(
                f"{r.where(layer, [f'{titem.kind} {titem.handle}'])}: text {text!r} is not the magnitude of "
                "any load line; ignored."
            )
    out.sort(key=lambda p: (round(p.at[0], 3), round(p.at[1], 3), p.case))
    return tuple(out)


def _parse_load(text: str, r: Reading, where: str) -> tuple[float, str]:
    m = _LOAD.match(text)
    hint = 'Write the magnitude in kN, optionally followed by the load case: "40 kN", "40", "12.5 kN wind".'
    if not m:
        raise LacunaError(f"load text {text!r} does not start with a number.", where=where, hint=hint)
    value = float(m["num"].replace(",", "."))
    word, rest = m["word"] or "", m["rest"] or ""
    if word.casefold() == "kn":
        case = rest
    elif word.casefold() in _OTHER_FORCE_UNITS:
        raise LacunaError(
            f"load text {text!r} gives the force in {word}; loads are read in kN.", where=where, hint=hint
        )
    else:
        case = f"{word} {rest}".strip()
    return _positive_kn(value, r, where, f"load text {text!r}"), case or DEFAULT_CASE


def _positive_kn(value, r: Reading, where: str, what: str) -> float:
    try:
        kn = float(value)
    except (TypeError, ValueError):
        kn = math.nan
    if not (kn > 0 and math.isfinite(kn)):
        raise LacunaError(
            f"{what} gives a magnitude of {value} kN; it must be a positive number.",
            where=where,
            hint="Give the size of the force in kN; its direction is the direction of the line.",
        )
    return kn


def _parse_fix(text: str, r: Reading, layer: str, label: str) -> str:
    m = _FIX.match(str(text))
    if not m:
        raise LacunaError(
            f"support fixity {text!r} is not one of xy, x, y.",
            where=r.where(layer, [label]),
            hint='Write "xy" (held both ways), "x" or "y" (held along that local axis of the panel).',
        )
    return "xy" if m[1].casefold() in ("xy", "yx") else m[1].casefold()


def _xdata(entity, r: Reading, layer: str, label: str) -> dict:
    if not entity.has_xdata(XDATA_APPID):
        return {}
    tags = list(entity.get_xdata(XDATA_APPID))
    data = {}
    for key, value in zip(tags[::2], tags[1::2]):
        if key.code != 1000 or key.value not in ("force_kN", "case", "fix"):
            raise LacunaError(
                f"XDATA {XDATA_APPID} of {label} has an unknown entry {key.value!r}.",
                where=r.where(layer, [label]),
                hint="Its entries are key/value pairs: force_kN (a real), case and fix (strings).",
            )
        data[key.value] = value.value
    return data


def _not_a_marker(item, r: Reading, expected: str) -> None:
    where = r.where(item.layer, [f"{item.kind} {item.handle}"])
    if item.kind in ANNOTATION:
        r.warnings.append(f"{where}: annotation ignored.")
        return
    raise LacunaError(
        f"a {item.kind} is not a marker this layer can hold; expected {expected}.",
        where=where,
        hint="Delete it or move it to another layer.",
    )


def _check_on_panel(local: np.ndarray, width: float, height: float, r: Reading, where: str, what: str,
                    openings) -> None:
    x, y = local
    tol = r.join_mm
    if not (-tol <= x <= width + tol and -tol <= y <= height + tol):
        raise LacunaError(
            f"the {what} at {r.fmt_local(local)} lies off the panel (outside its outline).",
            where=where,
            hint=f"Put the {what} on the panel or on its outline.",
        )
    point = Point(x, y)
    for opening in openings:
        if opening.shape.contains(point) and opening.shape.exterior.distance(point) > tol:
            raise LacunaError(
                f"the {what} at {r.fmt_local(local)} lies off the panel, inside the opening {opening.source}.",
                where=where,
                hint=f"Put the {what} on material: move it out of the opening or to the opening's edge.",
            )


def _off_outline(p: np.ndarray, width: float, height: float) -> float:
    x, y = p
    if 0 <= x <= width and 0 <= y <= height:
        return float(min(x, width - x, y, height - y))
    dx = max(-x, 0.0, x - width)
    dy = max(-y, 0.0, y - height)
    return float(math.hypot(dx, dy))


def _clip(local: np.ndarray, width: float, height: float) -> np.ndarray:
    # Markers drawn within the join tolerance outside the outline are put on it.
    return np.column_stack([np.clip(local[:, 0], 0.0, width), np.clip(local[:, 1], 0.0, height)])


def _distance_to(p: np.ndarray, geom: np.ndarray) -> float:
    if len(geom) == 1:
        return float(np.hypot(*(p - geom[0])))
    a, b = geom
    d = b - a
    t = 0.0 if not d.any() else float(np.clip((p - a) @ d / (d @ d), 0.0, 1.0))
    return float(np.hypot(*(p - a - t * d)))


def _text_position(item, r: Reading) -> np.ndarray:
    e = item.entity
    if e.dxftype() == "MTEXT":
        return _rel([e.dxf.insert], r, item)[0]
    aligned = e.dxf.get("halign", 0) or e.dxf.get("valign", 0)
    point = e.dxf.align_point if aligned and e.dxf.hasattr("align_point") else e.dxf.insert
    return _rel([e.ocs().to_wcs(point)], r, item)[0]


def _plain(e) -> str:
    return e.plain_text().strip()


def _rel(points, r: Reading, item) -> np.ndarray:
    rel = np.array([(p[0], p[1]) for p in points], dtype=float) - r.ref
    if not (np.abs(rel) <= FARTHEST).all():  # NaN fails too: a damaged file's "nan" or "inf"
        label = f"{item.kind} {item.handle}"
        raise LacunaError(
            f"{label} has a coordinate that is not a finite number, or lies more than {FARTHEST:.0e} drawing "
            "units from the panel.",
            where=r.where(item.layer, [label]),
            hint="Redraw the marker, or delete it.",
        )
    return rel
