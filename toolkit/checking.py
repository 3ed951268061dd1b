"""`lacuna check` as functions: voids drawn by hand, checked against the fabrication rules of a profile or job.

:func:`check_drawing` reads the panel (outline, openings, keep zones, support and load markers) and the voids
on the void layers, and proves every rule with :func:`toolkit.rules.check_layout`; :func:`check_outputs`
turns the result into files: a copy of the drawing with a marker on ``LACUNA-CHECK`` at each violation, and
the JSON summary. Nothing here writes to disk. docs/check.md describes the command for drafters.
"""

from __future__ import annotations

import dataclasses
import json
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

from .about import CAUTION, __version__
from .dxf_in import read_document
from .dxf_in.source import open_document
from .dxf_in.voids import VOID_LAYERS, read_voids
from .errors import LacunaError
from .inputs import check_panel
from .jobfile import Job, default_job, read_job
from .model import Frame, Panel, Rules, Void
from .edge_stress import edge_json, edge_violations
from .pipeline import job_rules
from .rules.check import STRESS_RULES, Violation, check_layout
from .rules.profiles import load_profile

# Only min_void_per_thickness reads the thickness. Without one in the job that rule is set aside (with a
# warning) and the panel carries this stand-in, which nothing in a check reads.
UNSET_THICKNESS_MM = 1.0

NOTHING_TO_CHECK = "nothing to check"


@dataclass(frozen=True, eq=False)
class CheckResult:
    """One check: the panel and rules used, the voids read (local mm), what broke, and the JSON summary.

    ``summary`` holds CONTRACT.md's ``violations`` (``where`` in drawing coordinates, lengths in the drawing's
    unit) and ``checked``, plus the rules with their sources, the voids, ``warnings`` and ``caution``.
    """

    panel: Panel
    rules: Rules
    voids: tuple[Void, ...]
    violations: tuple[Violation, ...]
    summary: dict
    layers: tuple[str, ...] = VOID_LAYERS

    @property
    def exit_code(self) -> int:
        """CONTRACT.md: 1 when any rule is broken, else 0 (also when there was nothing to check)."""
        return 1 if self.violations else 0

    def text_lines(self) -> list[str]:
        """What ``lacuna check`` prints without ``--json``: a headline, each violation, warnings, caution."""
        s = self.summary
        unit = s["units"]
        # positions and lengths to 0.01 mm, however large the coordinates and whatever the unit
        digits = max(0, math.ceil(2 + math.log10(self.panel.frame.mm_per_unit) - 1e-9))

        def num(value: float) -> str:
            text = f"{value:.{digits}f}".rstrip("0").rstrip(".") if digits else f"{value:.0f}"
            return "0" if text == "-0" else text

        lines = [f"{s['drawing']}: {s['message']}"]
        for v in s["violations"]:
            x, y = v["where"]
            lines.append(f"  {v['rule']} at ({num(x)}, {num(y)}) {unit}: measured {num(v['measured'])}, required "
                         f"{num(v['required'])} {'MPa' if v['rule'] in STRESS_RULES else unit}; handles {', '.join(v['handles']) or '-'}")
            lines.append(f"    {v['message']}")
        lines += [f"  warning: {w}" for w in s["warnings"]]
        lines += [f"  wrote {p}" for p in s.get("outputs", [])]
        lines.append(f"  caution: {CAUTION}")
        return lines


def check_drawing(dxf_path, job_path=None, *, profile: str | None = None,
                  layers: Sequence[str] | str | None = None) -> CheckResult:
    """Check the voids drawn in the DXF file at ``dxf_path`` against the fabrication rules.

    The rules are the job file's (its ``[rules]`` profile with its own values over it; lacuna's defaults
    without a job); ``profile`` names a profile to use instead of the job's. Voids are read from the three
    ``LACUNA-VOID-*`` layers and from ``layers`` (extra layer names, a list or "A,B"). Supports and point
    loads (from the job or the drawing's markers) set the bearing zones; no material is needed. A drawing
    with no voids is no error: ``checked`` is 0 and the summary says "nothing to check".
    """
    path = os.fspath(dxf_path)
    job = read_job(job_path) if job_path is not None else default_job()
    if profile is not None:
        job = _with_profile(job, profile)
    void_layers = _void_layers(layers, job)

    doc, warnings = open_document(path)
    drawing = read_document(doc, job.layers, path=path, voids_on=tuple(void_layers))
    warnings = list(job.warnings) + warnings + list(drawing.warnings)
    thickness_known = job.panel.thickness_mm is not None
    panel_job = job if thickness_known else dataclasses.replace(
        job, panel=dataclasses.replace(job.panel, thickness_mm=UNSET_THICKNESS_MM))
    panel, notes = check_panel(drawing, panel_job)
    warnings += notes

    rules = job_rules(job)
    if not thickness_known and rules.min_void_per_thickness > 0:
        warnings.append(
            f"profile {rules.profile} sizes voids by the panel thickness (min_void_per_thickness "
            f"{rules.min_void_per_thickness:g}), but no thickness is given: that rule is not checked. Give "
            "[panel] thickness in a job file to check it."
        )
        rules = dataclasses.replace(rules, min_void_per_thickness=0.0)
    if not rules.bore_diameters_mm:
        warnings.append("no stock bore diameters are in force (no profile, no [voids] bore_diameters): bore sizes "
                        "are not checked against stock.")

    voids = tuple(read_voids(doc, drawing.frame, void_layers, path, warnings=warnings))
    violations = tuple(check_layout(panel, voids, rules)) if voids else ()
    limit = job.rules.max_edge_stress_MPa
    edge = _edge_stresses(panel, voids, job, thickness_known) if voids and limit is not None else ()
    if edge:
        broken, unchecked = edge_violations(edge, voids, limit)
        violations += broken
        warnings += list(unchecked)
    summary = _summary(path, panel, rules, voids, violations, void_layers, warnings, thickness_known)
    if limit is not None:
        summary["rules"]["max_edge_stress_MPa"] = limit
        for entry, e in zip(summary["voids"], edge):   # both in the order the voids were read
            entry.update(edge_json(panel, e))
    return CheckResult(panel=panel, rules=rules, voids=voids, violations=violations, summary=summary,
                       layers=tuple(void_layers))


def check_outputs(result: CheckResult, dxf_path, *, replace: bool = False) -> dict[str, bytes | str]:
    """The files of a check, name -> content (nothing written): ``<stem>-check.dxf``, a copy of the drawing
    with a marker on ``LACUNA-CHECK`` at each violation, and ``<stem>-check.json``, the summary.

    Markers left on ``LACUNA-CHECK`` by an earlier check are refused, or deleted first with ``replace``.
    Every other entity, the voids on the ``LACUNA-VOID-*`` layers included, is kept as it was.
    """
    stem = Path(dxf_path).stem
    p = result.panel
    data = _marked_copy(os.fspath(dxf_path), p.frame, _markers(result), (p.width_mm, p.height_mm), replace)
    return {
        f"{stem}-check.dxf": data,
        f"{stem}-check.json": json.dumps(result.summary, indent=2, allow_nan=False) + "\n",
    }


def _edge_stresses(panel: Panel, voids: tuple[Void, ...], job: Job, thickness_known: bool):
    """The local models of the drawn voids, for [rules] max_edge_stress_MPa: the panel is analysed solid and
    with the voids cut, so the job must give what an analysis needs."""
    key = f"{job.source} [rules] max_edge_stress_MPa" if job.source else "[rules] max_edge_stress_MPa"
    missing = []
    if panel.material is None:
        missing.append("no [material] table (E_MPa, nu)")
    if not thickness_known:
        missing.append("no [panel] thickness")
    if missing:
        raise LacunaError(f"the largest edge stress is checked by analysing the panel, and the job gives "
                          f"{' and '.join(missing)}.", where=key,
                          hint="Add them to the job file, or leave max_edge_stress_MPa out to check the geometry "
                               "alone.")
    if not panel.loads and not panel.self_weight:
        raise LacunaError("the largest edge stress is to be checked, but the panel carries no load: no [[load]] "
                          "in the job and no LOAD marker in the drawing, so every stress would be zero and the check "
                          "would prove nothing.", where=key,
                          hint="Give the loads (and supports) in the job file or as drawing markers, or leave "
                               "max_edge_stress_MPa out to check the geometry alone.")
    from .analysis import analyze
    from .edge_stress import edge_stresses
    from .overlap import Overlap
    from .pipeline import with_voids

    solid = analyze(panel)
    final = analyze(with_voids(panel, voids), grid=solid.grid)
    # the local models of a hand-drawn layout, shared among the side threads (overlap.py; the same figures)
    with Overlap() as work:
        return edge_stresses(panel, voids, final, solid, work=work)


# --- inputs -----------------------------------------------------------------------------------------------------


def _with_profile(job: Job, profile: str) -> Job:
    if not isinstance(profile, str) or not profile.strip():
        raise LacunaError(f"the profile name is empty ({profile!r}).", where="--profile",
                          hint="Name a profile; `lacuna profiles` lists them.")
    try:
        load_profile(profile.strip())
    except LacunaError as error:
        raise LacunaError(error.message, where="--profile", hint=error.hint) from None
    return dataclasses.replace(job, rules=dataclasses.replace(job.rules, profile=profile.strip()))


def _void_layers(layers: Sequence[str] | str | None, job: Job) -> list[str]:
    extra: list[str] = []
    if isinstance(layers, str):
        extra = [name.strip() for name in layers.split(",")]
        if not all(extra):
            raise LacunaError(f"the layer list {layers!r} has an empty name.", where="--layers",
                              hint="Separate layer names with commas, e.g. --layers HOLES,SLOTS.")
    elif layers is not None:
        for name in layers:
            if not isinstance(name, str) or not name.strip():
                raise LacunaError(f"a void layer name must be text, got {name!r}.", where="layers",
                                  hint="Give the names of the layers holding the voids.")
            extra.append(name.strip())
    names = list(dict.fromkeys(list(VOID_LAYERS) + extra))
    roles = {getattr(job.layers, role).casefold(): role for role in ("outline", "openings", "keep", "support", "load")}
    for name in names:
        role = roles.get(name.casefold())
        if role is not None:
            raise LacunaError(
                f"layer {name!r} holds the panel's {role}, so it cannot also hold the voids to check.",
                where="--layers" if name in extra else f"[layers] {role}",
                hint="Name only the layers that hold the hand-drawn voids.",
            )
    return names


# --- the summary --------------------------------------------------------------------------------------------------


def _summary(path: str, panel: Panel, rules: Rules, voids: tuple[Void, ...], violations: tuple[Violation, ...],
             layers: list[str], warnings: list[str], thickness_known: bool) -> dict:
    f = panel.frame
    entries = [_violation_json(v, f) for v in violations]
    if not voids:
        message = f"{NOTHING_TO_CHECK}: no voids on the layers {', '.join(layers)}."
    elif violations:
        broken = len({i for v in violations for i in v.void_ids})
        message = (f"{len(violations)} violation{'s' if len(violations) != 1 else ''} of the {rules.profile} rules "
                   f"involving {broken} of {len(voids)} voids.")
    else:
        message = f"all {len(voids)} voids keep the {rules.profile} rules."
    return {
        "command": "check",
        "lacuna_version": __version__,
        "drawing": path,
        "panel": panel.name,
        "units": f.unit,
        "layers": list(layers),
        "checked": len(voids),
        "violations": entries,
        "message": message,
        "envelope": [f.length_to_drawing(panel.width_mm), f.length_to_drawing(panel.height_mm)],
        "thickness": f.length_to_drawing(panel.thickness_mm) if thickness_known else None,
        "voids": [_void_json(v, f) for v in voids],
        "rules": _rules_json(rules, f),
        "warnings": list(warnings),
        "caution": CAUTION,
        "outputs": [],
    }


def _violation_json(v: Violation, frame: Frame) -> dict:
    entry = v.to_json(frame)
    # a void or region drawn by several entities carries their handles joined by commas: one per entry here
    entry["handles"] = [h for joined in entry["handles"] for h in joined.split(",") if h]
    return entry


def _void_json(v: Void, f: Frame) -> dict:
    x, y = f.to_drawing(np.asarray(v.centre, dtype=float))
    return {
        "id": v.id,
        "family": v.family,
        "handles": [h for h in (v.handle or "").split(",") if h],
        "layer": v.layer,
        "centre": [round(float(x), 6), round(float(y), 6)],
        "sides": v.sides,
        "size": round(f.length_to_drawing(v.size_mm), 6),
        "length": round(f.length_to_drawing(v.length_mm), 6),
        # a slot's axis and a polygon's longest extent are directions without a sense; a bore has none
        "angle_deg": 0.0 if v.family == "bore" else round((v.angle_deg + f.angle_deg) % 180.0, 6),
        "area": v.area_mm2 / f.mm_per_unit ** 2,
    }


def _rules_json(rules: Rules, f: Frame) -> dict:
    """The rules in force, lengths in the drawing's unit, each with its source."""
    length = f.length_to_drawing
    values: dict[str, object] = {
        "min_web": length(rules.min_web_mm),
        "edge_cover": length(rules.edge_cover_mm),
        "min_void": length(rules.min_void_mm),
        "bearing_clearance": length(rules.bearing_clearance_mm),
        "bore_diameters": [length(d) for d in rules.bore_diameters_mm],
        "slot_widths": [length(w) for w in rules.slot_widths_mm],
        "corner": rules.corner,
        "corner_size": length(rules.corner_size_mm),
        "web_ratio": rules.web_ratio,
        "min_void_per_thickness": rules.min_void_per_thickness,
        "depth_band": rules.depth_band,
    }
    return {"profile": rules.profile, "unit": f.unit, "values": values, "sources": dict(rules.sources)}


# --- the marked copy ------------------------------------------------------------------------------------------------


def _label(v: dict) -> str:
    """A short marker label in the drawing's unit: the rule and the figure that breaks it."""
    m, req = v["measured"], v["required"]
    if v["rule"] in ("overlap", "opening", "keep", "outside"):
        return f"{v['rule']} {m:.4g} deep" if v["rule"] != "outside" else f"outside by {m:.4g}"
    if v["rule"] == "stock_size":
        return f"stock_size {m:.4g} (stock {req:.4g})"
    if v["rule"] == "max_edge_stress":
        return f"edge stress {m:.3g} MPa > {req:.3g}"
    return f"{v['rule']} {m:.4g} < {req:.4g}"


def _markers(result: CheckResult):
    from .write.shapes import Marker

    return [Marker(where=tuple(float(c) for c in v.where), label=_label(entry))
            for v, entry in zip(result.violations, result.summary["violations"])]


def _marked_copy(path: str, frame: Frame, markers, panel_size_mm: tuple[float, float], replace: bool) -> bytes:
    """The drawing with the markers added on LACUNA-CHECK, as file bytes (same version and format)."""
    from .write.dxf_copy import add_check_markers, result_copy_bytes

    return result_copy_bytes(path, frame, add=add_check_markers, check_markers=markers,
                             panel_size_mm=panel_size_mm, replace=replace)
