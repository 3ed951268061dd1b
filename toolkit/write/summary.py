"""The JSON summaries of `analyze` and `optimize` (CONTRACT.md keys), the schedule lines of the voids to make, and
the notes the drawing copy carries: positions and lengths in the drawing's frame and unit."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from ..about import CAUTION, __version__
from ..edge_stress import edge_json
from ..model import Drawing, Panel, lengths_in_unit
from ..voids.ceiling import ceiling_sentence

if TYPE_CHECKING:
    from ..analysis import Analysis
    from ..pipeline import OptimizeRun


def drawing_xy(panel: Panel, local_xy) -> list[float]:
    """A point of the panel's local frame in the drawing's coordinates."""
    return [float(v) for v in panel.frame.to_drawing(np.asarray(local_xy, dtype=float))]


def drawing_kN(panel: Panel, vector_N) -> list[float]:
    """A force sum in kN in the drawing's axes, a component at round-off level of the other (a sum of reactions
    that balance to 1e-13 of the load) given as 0: the figure means "none", not 2.9e-10 kN."""
    v = np.asarray(panel.frame.vector_to_drawing(np.asarray(vector_N, dtype=float)), dtype=float) / 1000.0
    scale = float(np.max(np.abs(v))) if v.size else 0.0
    v = np.where(np.abs(v) <= 1e-9 * scale, 0.0, v)
    return [float(x) + 0.0 for x in v]


def analysis_summary(panel: Panel, drawing: Drawing | None, result: Analysis) -> dict:
    """The JSON of ``lacuna analyze`` (CONTRACT.md keys first). Positions and force sums in the drawing's axes."""
    from ..moving import summary as travel_summary

    weights = result.case_weights
    cases = {}
    for i, case in enumerate(result.cases):
        cases[case] = {
            "weight": float(weights[i]),
            "compliance_Nmm": float(result.compliance_per_case_Nmm[i]),
            "max_deflection_mm": float(np.hypot(result.U[0::2, i], result.U[1::2, i]).max()),
            "max_von_mises_MPa": float(result.von_mises[i][result.active].max()),
            "reaction_sum_kN": drawing_kN(panel, result.reaction_sum_N[i]),
            "load_sum_kN": drawing_kN(panel, result.load_sum_N[i]),
        }
    summary = {
        "command": "analyze",
        "lacuna_version": __version__,
        "panel": panel.name,
        "drawing": str(panel.source or (drawing.path if drawing else "")),
        "units": panel.frame.unit,
        "envelope_mm": [panel.width_mm, panel.height_mm],
        "thickness_mm": panel.thickness_mm,
        "element_size_mm": [result.grid.dx, result.grid.dy],
        "elements": result.elements,
        "compliance_Nmm": result.compliance_Nmm,
        "max_deflection_mm": result.max_deflection_mm,
        "max_deflection_at": drawing_xy(panel, result.max_deflection_at),
        "max_deflection_case": result.max_deflection_case,
        "max_von_mises_MPa": result.max_von_mises_MPa,
        "max_von_mises_at": drawing_xy(panel, result.max_von_mises_at),
        "max_von_mises_case": result.max_von_mises_case,
        "reaction_sum_kN": drawing_kN(panel, result.reaction_sum_N.sum(axis=0)),
        "load_sum_kN": drawing_kN(panel, result.load_sum_N.sum(axis=0)),
        "self_weight_kN": self_weight_kN(panel),
        "cases": cases,
        "moving_loads": travel_summary(panel, {"solid": result}),
        "warnings": list((drawing.warnings if drawing else ()) + result.warnings),
        "caution": CAUTION,
        "outputs": [],
    }
    return summary


def self_weight_kN(panel: Panel) -> float | None:
    """The weight of the panel as drawn, kN (in every load case's loads), or None without self-weight."""
    from ..fe.loads import weight_per_area

    if not (panel.self_weight and panel.material.density_kg_m3):
        return None
    return float(weight_per_area(panel) * panel.solid.area / 1000.0)


def _void_json(panel: Panel, void) -> dict:
    """One schedule line: what a shop needs to make the void, in the drawing's frame and unit. An n-gon carries
    its corners (the sharp ones, before easing) and whether it is regular; a slot the centres of its two end
    arcs and its width; a bore its diameter."""
    f = panel.frame
    out = {
        "id": void.id,
        "family": void.family,
        "centre": drawing_xy(panel, void.centre),
        "sides": void.sides,
        "size": f.length_to_drawing(void.size_mm),
        "length": f.length_to_drawing(void.length_mm),
        "angle_deg": (void.angle_deg + f.angle_deg) % (360.0 / void.sides if void.regular else 360.0),
        "area": void.area_mm2 / f.mm_per_unit**2,
        "tool": lengths_in_unit(void.tool, f),
    }
    if void.family == "polygon":
        out["regular"] = bool(void.regular)
        out["corners"] = [drawing_xy(panel, c) for c in void.corners]
    elif void.family == "slot":
        a = np.radians(void.angle_deg)
        half = (void.length_mm - void.size_mm) / 2.0 * np.array([np.cos(a), np.sin(a)])
        c = np.asarray(void.centre, dtype=float)
        out["ends"] = [drawing_xy(panel, c - half), drawing_xy(panel, c + half)]
        out["width"] = f.length_to_drawing(void.size_mm)
    else:
        out["diameter"] = f.length_to_drawing(void.size_mm)
    return out


EDGE_STRESS_BASIS = (
    "peak_stress_MPa: the largest stress along the void's edge (the stress along the edge, a principal stress "
    "there), magnitude, from a local model of the void (six-node triangles following the edges, driven by the "
    "panel's grid displacements at the window's sides); nominal_stress_MPa: the solid panel's stress at the void "
    "(its stress tensor averaged over the void's area, larger principal stress as a magnitude), same load case; "
    "kt = peak / nominal. See docs/edge-stress.md."
)


def voids_json(run: OptimizeRun) -> list[dict]:
    """The schedule lines of the voids to make, each with its edge-stress figures."""
    edges = list(getattr(run, "edge", ())) or [None] * len(run.voids)   # in ``voids`` order
    return [_void_json(run.panel, v) | edge_json(run.panel, e) for v, e in zip(run.voids, edges)]


def _shape_json(run: OptimizeRun) -> dict | None:
    """The made layout before and after the shape optimisation (its own analyses: voided elements at a trace of
    stiffness, loads of the solid panel), or None when it did not run."""
    shape = run.rationalised.shape
    if shape is None:
        return None
    solid = float(run.panel.solid.area)
    names = ("first_fit", "same_mass", "grown")
    return {
        **{f"compliance_{n}_Nmm": float(c) for n, c in zip(names, shape.compliance_Nmm)},
        **{f"removed_{n}_percent": 100.0 * float(a) / solid for n, a in zip(names, shape.area_mm2)},
        "analyses": int(shape.analyses),
    }


def optimize_summary(run: OptimizeRun, drawing: Drawing | None) -> dict:
    """The JSON of ``lacuna optimize`` (CONTRACT.md keys), lengths of voids in the drawing's unit."""
    from ..moving import summary as travel_summary

    panel, beso, rules = run.panel, run.beso, run.rules
    solid = analysis_summary(panel, drawing, run.solid)
    for key in ("command", "lacuna_version", "panel", "drawing", "warnings", "caution", "outputs", "moving_loads"):
        solid.pop(key, None)
    f = panel.frame
    c_solid = run.solid.compliance_Nmm
    c_final = run.final.compliance_Nmm
    design_share = float(beso.design.sum()) / float(beso.design.size)
    return {
        "command": "optimize",
        "lacuna_version": __version__,
        "panel": panel.name,
        "drawing": str(panel.source or (drawing.path if drawing else "")),
        "units": f.unit,
        "solid": solid,
        "iterations": beso.iterations,
        "converged": bool(beso.converged),
        "volume_fraction_basis": (
            "share of the design region kept solid: the panel less its edge band, bearing zones, webs round "
            f"openings and KEEP zones ({100 * design_share:.1f} % of the grid's elements)"
        ),
        "volume_fraction_target": float(run.settings.volume_fraction),
        "volume_fraction_final": float(beso.volume_fraction[-1]),
        "filter_radius_mm": float(beso.filter_radius_mm),
        "compliance_solid_Nmm": c_solid,
        "compliance_freeform_Nmm": run.freeform_analysis.compliance_Nmm,
        "compliance_optimizer_Nmm": float(beso.compliance_final_Nmm),
        "mass_removed_freeform_percent": run.freeform_removed_percent,
        "compliance_rationalized_Nmm": c_final,
        "stiffness_loss_percent": 100.0 * (c_final / c_solid - 1.0) if c_solid > 0 else 0.0,
        "max_deflection_freeform_mm": run.freeform_analysis.max_deflection_mm,
        "max_deflection_rationalized_mm": run.final.max_deflection_mm,
        "max_von_mises_rationalized_MPa": run.final.max_von_mises_MPa,
        "mass_removed_percent": run.mass_removed_percent,
        "mass_removed_kg": run.mass_removed_kg,
        "capture_percent": run.capture_percent,
        # the most the family's voids can open of the ground they stand on under the spacing rules, and why
        "capture_ceiling_percent": 100.0 * run.ceiling.share if run.ceiling is not None else None,
        "capture_ceiling": lengths_in_unit(ceiling_sentence(run.ceiling), f)
        if run.ceiling is not None else "",
        "limit": lengths_in_unit(run.limit, f),
        "shape_optimisation": _shape_json(run),
        # Each travelling load's stops with the compliance of each in the three analyses (docs/moving-loads.md).
        "moving_loads": travel_summary(panel, {"solid": run.solid, "freeform": run.freeform_analysis,
                                               "rationalized": run.final}),
        "freeform_voids": len(run.freeform),
        "voids": voids_json(run),
        "edge_stress_basis": EDGE_STRESS_BASIS,
        "rules": {
            "profile": rules.profile,
            "min_web": f.length_to_drawing(rules.min_web_mm),
            "edge_cover": f.length_to_drawing(rules.edge_cover_mm),
            "min_void": f.length_to_drawing(rules.min_void_mm),
            "bearing_clearance": f.length_to_drawing(rules.bearing_clearance_mm),
            "bore_diameters": [f.length_to_drawing(d) for d in rules.bore_diameters_mm],
            "slot_widths": [f.length_to_drawing(d) for d in rules.slot_widths_mm],
            "web_ratio": rules.web_ratio,
            "depth_band": rules.depth_band,
            "least_feature": f.length_to_drawing(rules.least_feature_mm),
            "corner": {"kind": rules.corner, "size": f.length_to_drawing(rules.corner_size_mm)},
            "max_edge_stress_MPa": run.edge_limit_MPa,
            "sources": dict(rules.sources),
            "violations": [v.to_json(f) for v in run.rationalised.violations],
            "margins": _margins_json(run),
        },
        # Sentences in the drawing's unit, as the figures beside them.
        "changes": [lengths_in_unit(c, f) for c in run.rationalised.changes],
        "dropped": [lengths_in_unit(d, f) for d in run.rationalised.dropped],
        "history": {
            "compliance_Nmm": [float(c) for c in beso.compliance_Nmm],
            "volume_fraction": [float(v) for v in beso.volume_fraction],
        },
        # the drawing's own warnings quote it as it is; the run's are sentences in the drawing's unit too
        "warnings": list(drawing.warnings if drawing else ()) + [lengths_in_unit(w, f)
                                                                 for w in run.solid.warnings + run.warnings],
        # What the fitting did that is worth knowing but nothing to fix: islands filled, symmetry kept, the
        # honeycomb taken, voids added, a shape stage that kept its input.
        "notes": [lengths_in_unit(n, f) for n in run.rationalised.notes],
        "caution": CAUTION,
        "outputs": [],
    }


def _margins_json(run: OptimizeRun) -> list[dict]:
    """Every rule in force with where the made layout comes closest to it (rules.check.rule_margins); lengths in
    the drawing's unit."""
    from ..rules.check import rule_margins

    f = run.panel.frame

    def length(x):
        return None if x is None else f.length_to_drawing(x)

    return [{"rule": m.rule, "required": length(m.required), "measured": length(m.measured),
             "margin": length(m.margin), "voids": list(m.void_ids), "where": lengths_in_unit(m.text, f)}
            for m in rule_margins(run.panel, run.voids, run.rules)]


def drawing_notes(run: OptimizeRun) -> list[str]:
    """The notes the drawing copy carries below the panel: what was removed, the rules, the largest edge stress,
    the caution."""
    f = run.panel.frame
    r = run.rules
    return [
        f"LACUNA: {len(run.voids)} voids, {run.mass_removed_percent:.1f} % of the material removed; "
        f"stiffness {100 * (run.final.compliance_Nmm / run.solid.compliance_Nmm - 1):+.1f} % compliance "
        "against the solid panel.",
        f"Rules: profile {r.profile}, min web {f.length_to_drawing(r.min_web_mm):g}, edge cover "
        f"{f.length_to_drawing(r.edge_cover_mm):g}, bearing clearance "
        f"{f.length_to_drawing(r.bearing_clearance_mm):g} ({f.unit}).",
        *_edge_note(run),
        "For design exploration only: to be checked by a qualified engineer to the local code.",
    ]


def _edge_note(run: OptimizeRun) -> list[str]:
    """The drawing's note on the largest edge stress (local models), when any void has one."""
    edged = [e for e in getattr(run, "edge", ()) if e.peak_MPa is not None]
    if not edged:
        return []
    top = max(edged, key=lambda e: e.peak_MPa)
    kt = f", Kt {top.kt:.2f}" if top.kt is not None else ""
    return [f"Largest stress at a void's edge: {top.peak_MPa:.3g} MPa ({top.sense}{kt}) at {top.void_id}, from "
            "its local model."]
