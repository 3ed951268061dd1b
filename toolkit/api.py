"""What the commands do, as functions a script or a CAD host can call: drawing + job in, figures and files out."""

from __future__ import annotations

import dataclasses
import datetime as _dt
import json
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

import numpy as np

from . import CAUTION, __version__
from .analysis import Analysis, analyze
from .inputs import load_panel
from .jobfile import template_text
from .errors import LacunaError
from .model import Drawing, Panel
from .edge_stress import edge_json
from .pipeline import OptimizeRun, optimize_panel
from .report import report_markdown
from .outputs import default_out_dir, plan_outputs, write_outputs
from .svg_out import analysis_svg

DEMO_NAME = "loft-lintel"


@dataclass
class Outcome:
    """What a command produced: the JSON summary and the files written."""

    summary: dict
    paths: list[Path] = field(default_factory=list)
    run: object = None

    def text_lines(self) -> list[str]:
        s = self.summary
        if s.get("command") == "optimize":
            lines = _optimize_lines(s)
        else:
            lines = [f"{s.get('panel', 'panel')}: {s['elements']} elements"] + _figure_lines(s)
        lines += [f"  warning: {w}" for w in s.get("warnings", [])]
        lines += [f"  note: {n}" for n in s.get("notes", [])]
        lines += [f"  wrote {p}" for p in s.get("outputs", [])]
        lines.append(f"  caution: {CAUTION}")
        return lines


def _figure_lines(s: dict) -> list[str]:
    return [
        f"  compliance            {s['compliance_Nmm']:.6g} N mm",
        f"  largest deflection    {s['max_deflection_mm']:.4g} mm",
        f"  largest von Mises     {s['max_von_mises_MPa']:.4g} MPa",
        f"  loads / reactions     [{s['load_sum_kN'][0]:.4g}, {s['load_sum_kN'][1]:.4g}] / "
        f"[{s['reaction_sum_kN'][0]:.4g}, {s['reaction_sum_kN'][1]:.4g}] kN",
    ]


def _optimize_lines(s: dict) -> list[str]:
    sol = s["solid"]
    lines = [f"{s['panel']}: {sol['elements']} elements, {s['iterations']} iterations "
             f"({'converged' if s['converged'] else 'NOT converged'})"]
    lines.append(f"  {'':22s}{'solid':>14s}{'freeform':>14s}{'to make':>14s}")
    lines.append(f"  {'compliance, N mm':22s}{s['compliance_solid_Nmm']:14.6g}{s['compliance_freeform_Nmm']:14.6g}"
                 f"{s['compliance_rationalized_Nmm']:14.6g}")
    lines.append(f"  {'largest deflection, mm':22s}{sol['max_deflection_mm']:14.4g}"
                 f"{s['max_deflection_freeform_mm']:14.4g}{s['max_deflection_rationalized_mm']:14.4g}")
    lines.append(f"  {'material removed':22s}{'0 %':>14s}{s['mass_removed_freeform_percent']:12.1f} %"
                 f"{s['mass_removed_percent']:12.1f} %")
    if s.get("capture_percent") is not None:
        lines.append(f"  {'kept of the saving':22s}{'':14s}{'':14s}{s['capture_percent']:12.1f} %")
    lines.append(f"  {len(s['voids'])} voids; rules {s['rules']['profile']}: "
                 f"{len(s['rules']['violations'])} violations")
    edged = [v for v in s["voids"] if v.get("peak_stress_MPa") is not None]
    if edged:
        top = max(edged, key=lambda v: v["peak_stress_MPa"])
        kt = f", Kt {top['kt']:.2f}" if top.get("kt") is not None else ""
        lines.append(f"  largest edge stress   {top['peak_stress_MPa']:.4g} MPa at {top['id']} "
                     f"({top['peak_stress_sense']}{kt}; local models of the voids)")
    for t in s.get("moving_loads", []):
        lines.append(f"  travelling load {t['case']}: {t['stops']} stops; largest compliance over them "
                     f"{t['compliance_solid_max_Nmm']:.6g} / {t['compliance_freeform_max_Nmm']:.6g} / "
                     f"{t['compliance_rationalized_max_Nmm']:.6g} N mm (solid / freeform / to make)")
    if s.get("limit"):
        lines.append(f"  limit: {s['limit']}")
    return lines


def _drawing_xy(panel: Panel, local_xy) -> list[float]:
    return [float(v) for v in panel.frame.to_drawing(np.asarray(local_xy, dtype=float))]


def _drawing_kN(panel: Panel, vector_N) -> list[float]:
    """A force sum in kN in the drawing's axes, a component at round-off level of the other (a sum of reactions
    that balance to 1e-13 of the load) given as 0: the figure means "none", not 2.9e-10 kN."""
    v = np.asarray(panel.frame.vector_to_drawing(np.asarray(vector_N, dtype=float)), dtype=float) / 1000.0
    scale = float(np.max(np.abs(v))) if v.size else 0.0
    v = np.where(np.abs(v) <= 1e-9 * scale, 0.0, v)
    return [float(x) + 0.0 for x in v]


def analysis_summary(panel: Panel, drawing: Drawing | None, result: Analysis) -> dict:
    """The JSON of ``lacuna analyze`` (CONTRACT.md keys first). Positions and force sums in the drawing's axes."""
    from .moving import summary as travel_summary

    weights = result.case_weights
    cases = {}
    for i, case in enumerate(result.cases):
        cases[case] = {
            "weight": float(weights[i]),
            "compliance_Nmm": float(result.compliance_per_case_Nmm[i]),
            "max_deflection_mm": float(np.hypot(result.U[0::2, i], result.U[1::2, i]).max()),
            "max_von_mises_MPa": float(result.von_mises[i][result.active].max()),
            "reaction_sum_kN": _drawing_kN(panel, result.reaction_sum_N[i]),
            "load_sum_kN": _drawing_kN(panel, result.load_sum_N[i]),
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
        "max_deflection_at": _drawing_xy(panel, result.max_deflection_at),
        "max_deflection_case": result.max_deflection_case,
        "max_von_mises_MPa": result.max_von_mises_MPa,
        "max_von_mises_at": _drawing_xy(panel, result.max_von_mises_at),
        "max_von_mises_case": result.max_von_mises_case,
        "reaction_sum_kN": _drawing_kN(panel, result.reaction_sum_N.sum(axis=0)),
        "load_sum_kN": _drawing_kN(panel, result.load_sum_N.sum(axis=0)),
        "cases": cases,
        "moving_loads": travel_summary(panel, {"solid": result}),
        "warnings": list((drawing.warnings if drawing else ()) + result.warnings),
        "caution": CAUTION,
        "outputs": [],
    }
    return summary


def analysis_figures(panel: Panel, result: Analysis, *, date: str | None = None) -> dict[str, str]:
    """One SVG per load case: file-name suffix -> SVG text. Of a travelling load's stops only the one of largest
    compliance is drawn (a figure per stop would write as many files as there are stops; the JSON lists them all)."""
    skip = set()
    for travel in panel.travels:
        worst = max(travel.cases, key=lambda c: result.compliance_per_case_Nmm[result.cases.index(c)])
        skip |= set(travel.cases) - {worst}
    figures = {}
    for i, case in enumerate(result.cases):
        if case in skip:
            continue
        suffix = "analysis.svg" if len(result.cases) == 1 else f"analysis-{_slug(case)}.svg"
        figures[suffix] = analysis_svg(
            panel, result.grid, result.fractions * result.active, result.U[:, i], result.stresses[i],
            case=case, date=date,
        )
    return figures


def _slug(text: str) -> str:
    keep = "".join(c if c.isalnum() or c in "-_" else "-" for c in text.strip().lower())
    return keep.strip("-") or "case"


def _finish(summary: dict, files: dict[str, bytes | str], json_name: str, out_dir: Path, inputs: list[Path],
            force: bool) -> Outcome:
    """Name every output in the summary, then write all of them (the JSON last, listing them all)."""
    names = list(files) + [json_name]
    targets = plan_outputs(out_dir, names, inputs=inputs, force=force)
    summary["outputs"] = [str(t) for t in targets]
    files = dict(files)
    files[json_name] = json.dumps(summary, indent=2, allow_nan=False) + "\n"
    paths = write_outputs(out_dir, files, inputs=inputs, force=force)
    return Outcome(summary=summary, paths=paths)


def analyze_file(dxf_path, job_path=None, *, out_dir=None, force: bool = False) -> Outcome:
    """``lacuna analyze``: read, solve, write ``<stem>-analysis.json`` and the SVG figure(s)."""
    dxf_path = Path(dxf_path)
    panel, _job, drawing = load_panel(dxf_path, job_path)
    result = analyze(panel)
    summary = analysis_summary(panel, drawing, result)
    stem = dxf_path.stem
    date = _dt.date.today().isoformat()
    files = {f"{stem}-{suffix}": svg for suffix, svg in analysis_figures(panel, result, date=date).items()}
    out = Path(out_dir) if out_dir is not None else default_out_dir(dxf_path)
    inputs = [dxf_path] + ([Path(job_path)] if job_path else [])
    return _finish(summary, files, f"{stem}-analysis.json", out, inputs, force)


def _tool_in_unit(tool: str, frame) -> str:
    """The schedule's tool words with their lengths (written in mm by the voids stage) in the drawing's unit, so a
    schedule in metres says "0.282 m overall", like its columns."""
    if frame.unit == "mm":
        return tool
    import re

    def convert(match) -> str:
        value = frame.length_to_drawing(float(match.group(1)))
        return f"{value:.4g} {frame.unit}"

    return re.sub(r"(\d+(?:\.\d+)?) mm\b", convert, tool)


# Decimals of a length in the schedule, by unit: a thousandth of a millimetre whatever the unit (the corner
# coordinates are set out from these figures).
_DECIMALS = {"mm": 3, "cm": 4, "m": 6, "in": 5, "ft": 6}


def _void_json(panel: Panel, void) -> dict:
    """One schedule line: what a shop needs to make the void, in the drawing's frame and unit. An n-gon carries
    its corners (the sharp ones, before easing) and whether it is regular; a slot the centres of its two end
    arcs and its width; a bore its diameter."""
    f = panel.frame
    out = {
        "id": void.id,
        "family": void.family,
        "centre": _drawing_xy(panel, void.centre),
        "sides": void.sides,
        "size": f.length_to_drawing(void.size_mm),
        "length": f.length_to_drawing(void.length_mm),
        "angle_deg": (void.angle_deg + f.angle_deg) % (360.0 / void.sides if void.regular else 360.0),
        "area": void.area_mm2 / f.mm_per_unit**2,
        "tool": _tool_in_unit(void.tool, f),
    }
    if void.family == "polygon":
        out["regular"] = bool(void.regular)
        out["corners"] = [_drawing_xy(panel, c) for c in void.corners]
    elif void.family == "slot":
        a = np.radians(void.angle_deg)
        half = (void.length_mm - void.size_mm) / 2.0 * np.array([np.cos(a), np.sin(a)])
        c = np.asarray(void.centre, dtype=float)
        out["ends"] = [_drawing_xy(panel, c - half), _drawing_xy(panel, c + half)]
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


def _voids_json(run: OptimizeRun) -> list[dict]:
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
    from .moving import summary as travel_summary

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
        "limit": run.limit,
        "shape_optimisation": _shape_json(run),
        # Each travelling load's stops with the compliance of each in the three analyses (docs/moving-loads.md).
        "moving_loads": travel_summary(panel, {"solid": run.solid, "freeform": run.freeform_analysis,
                                               "rationalized": run.final}),
        "freeform_voids": len(run.freeform),
        "voids": _voids_json(run),
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
        "changes": list(run.rationalised.changes),
        "dropped": list(run.rationalised.dropped),
        "history": {
            "compliance_Nmm": [float(c) for c in beso.compliance_Nmm],
            "volume_fraction": [float(v) for v in beso.volume_fraction],
        },
        "warnings": list((drawing.warnings if drawing else ()) + run.solid.warnings + run.warnings),
        # What the fitting did that is worth knowing but nothing to fix: islands filled, symmetry kept, the
        # honeycomb taken, voids added, a shape stage that kept its input.
        "notes": list(run.rationalised.notes),
        "caution": CAUTION,
        "outputs": [],
    }


def schedule_csv(run: OptimizeRun) -> str:
    """The void schedule as CSV: one row per void, lengths in the drawing's unit."""
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    unit = run.panel.frame.unit
    w.writerow(["id", "family", f"centre_x_{unit}", f"centre_y_{unit}", "sides", f"size_{unit}",
                f"length_{unit}", "angle_deg", f"area_{unit}2", "tool", "regular", f"points_{unit}",
                "peak_stress_MPa", "nominal_stress_MPa", "kt", f"least_web_{unit}", "web_stress_MPa", "edge_note"])
    d = _DECIMALS.get(unit, 6)
    for v in _voids_json(run):
        # The points a shop sets out from: an n-gon's corners, a slot's two arc centres; a bore needs its centre.
        points = v.get("corners") or v.get("ends") or []
        w.writerow([v["id"], v["family"], f"{v['centre'][0]:.{d}f}", f"{v['centre'][1]:.{d}f}", v["sides"],
                    f"{v['size']:.{d}f}", f"{v['length']:.{d}f}", f"{v['angle_deg']:.2f}", _area_text(v["area"]),
                    v["tool"], {True: "yes", False: "no"}.get(v.get("regular"), ""),
                    "; ".join(f"{x:.{d}f} {y:.{d}f}" for x, y in points), *_edge_cells(v, d)])
    return buf.getvalue()


def _area_text(area: float) -> str:
    """An area to six significant figures, never with an exponent (0.0497123 m2, 49712.3 mm2)."""
    if area == 0:
        return "0"
    digits = max(0, 5 - int(np.floor(np.log10(abs(area)))))
    text = f"{area:.{digits}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def _edge_cells(v: dict, decimals: int = 3) -> list[str]:
    """The schedule's edge-stress columns: peak, nominal, Kt, the narrowest web (a length in the drawing's unit,
    to ``decimals``) and its average stress, the note (empty cells where the local model gave no figure; the note
    says why)."""
    fmt = lambda x, d="{:.3g}": "" if x is None else d.format(x)  # noqa: E731
    web = min(v.get("webs") or [], key=lambda w: w["width"], default=None)
    return [fmt(v.get("peak_stress_MPa")), fmt(v.get("nominal_stress_MPa")), fmt(v.get("kt")),
            fmt(web and web["width"], "{:.%df}" % decimals), fmt(web and web["mean_stress_MPa"]),
            " ".join(filter(None, [v.get("edge_note", ""), web["note"] if web else ""]))]


# What ``optimize_file`` writes for a drawing <stem>, besides the frames: <stem>-<suffix> each.
OPTIMIZE_OUTPUTS = ("lacuna.dxf", "result.svg", "layout.svg", "convergence.svg", "schedule.csv", "schedule.json",
                    "report.md", "optimize.json")


def optimize_file(dxf_path, job_path=None, *, out_dir=None, force: bool = False, frames: int = 0,
                  on_iteration=None, dxf_version: str | None = None, replace: bool = False, job=None) -> Outcome:
    """``lacuna optimize``: the whole job; writes the drawing copy with our layers, figures, schedule, JSON.

    ``job``: a :class:`toolkit.jobfile.Job` already read (a sweep's point), used instead of reading ``job_path``."""
    from .dxf_out import refuse_earlier_results, result_copy_bytes
    from .svg_out import convergence_svg, layout_frame_svg, result_svg

    dxf_path = Path(dxf_path)
    panel, job, drawing = load_panel(dxf_path, job_path, job=job)
    refuse_earlier_results(dxf_path, replace=replace)
    stem = dxf_path.stem
    out = Path(out_dir) if out_dir is not None else default_out_dir(dxf_path)
    inputs = [dxf_path] + ([Path(job_path)] if job_path else [])
    # Before the long run, not after it: an output already there (without force) or a folder that cannot be
    # written is refused now. The same names are written below.
    plan_outputs(out, [f"{stem}-{suffix}" for suffix in OPTIMIZE_OUTPUTS], inputs=inputs, force=force)
    if frames and not force and out.is_dir() and any(out.glob(f"{stem}-frame-*.svg")):
        raise LacunaError(f"{out} already holds frames of an earlier run ({stem}-frame-*.svg).",
                          hint="Choose another --out folder, or pass --force to replace them.")
    run = optimize_panel(panel, job, on_iteration=on_iteration, keep_every=frames)
    summary = optimize_summary(run, drawing)
    date = _dt.date.today().isoformat()
    grid = run.solid.grid
    files: dict[str, bytes | str] = {}
    files[f"{stem}-lacuna.dxf"] = result_copy_bytes(
        dxf_path, panel.frame, voids=run.voids, freeform=list(run.freeform),
        notes=_notes(run), panel_size_mm=(panel.width_mm, panel.height_mm), dxf_version=dxf_version,
        replace=replace,
    )
    # The sheet a shop makes from: the panel as it will be made, the voids cut, ordinates from the datum; the
    # optimiser's layout (its densities and freeform voids under the voids to make) is a figure of its own.
    files[f"{stem}-result.svg"] = result_svg(
        panel, grid, voids=run.voids, underlay="made",
        profile=run.rules.profile, volume_removed_percent=run.mass_removed_percent,
        mass_removed_kg=run.mass_removed_kg, date=date, violations=run.rationalised.violations,
    )
    files[f"{stem}-layout.svg"] = result_svg(
        panel, grid, densities=run.beso.densities, freeform=run.freeform, voids=run.voids,
        title=f"{panel.name}: the optimiser's layout", profile=run.rules.profile,
        volume_removed_percent=run.mass_removed_percent, mass_removed_kg=run.mass_removed_kg, date=date,
        violations=run.rationalised.violations,
    )
    files[f"{stem}-convergence.svg"] = convergence_svg(
        run.beso.compliance_Nmm, run.beso.volume_fraction, target=run.settings.volume_fraction, title=panel.name,
    )
    files[f"{stem}-schedule.csv"] = schedule_csv(run)
    files[f"{stem}-schedule.json"] = json.dumps({"units": panel.frame.unit, "voids": summary["voids"]},
                                                indent=2) + "\n"
    files[f"{stem}-report.md"] = report_markdown(
        summary, result_svg=f"{stem}-result.svg", convergence_svg=f"{stem}-convergence.svg",
        layout_svg=f"{stem}-layout.svg",
        schedule_csv=f"{stem}-schedule.csv", date=date,
    )
    for iteration, densities in run.beso.snapshots if frames else ():
        k = min(iteration, len(run.beso.compliance_Nmm) - 1)  # history[i] is the design analysed at iteration i
        # Iterations count from 1 in every figure and message (the first analysis is iteration 1).
        files[f"{stem}-frame-{iteration + 1:04d}.svg"] = layout_frame_svg(
            panel, grid, densities, iteration=iteration + 1,
            compliance_Nmm=float(run.beso.compliance_Nmm[k]),
            volume_fraction=float(run.beso.volume_fraction[k]),
        )
    assert {f"{stem}-{suffix}" for suffix in OPTIMIZE_OUTPUTS} == set(files) - {
        n for n in files if n.startswith(f"{stem}-frame-")} | {f"{stem}-optimize.json"}, "outputs checked early"
    outcome = _finish(summary, files, f"{stem}-optimize.json", out, inputs, force)
    outcome.run = run
    return outcome


def _margins_json(run: OptimizeRun) -> list[dict]:
    """Every rule in force with where the made layout comes closest to it (rules.check.rule_margins); lengths in
    the drawing's unit."""
    from .rules.check import rule_margins

    f = run.panel.frame

    def length(x):
        return None if x is None else f.length_to_drawing(x)

    return [{"rule": m.rule, "required": length(m.required), "measured": length(m.measured),
             "margin": length(m.margin), "voids": list(m.void_ids), "where": m.text}
            for m in rule_margins(run.panel, run.voids, run.rules)]


def _notes(run: OptimizeRun) -> list[str]:
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


def check_file(dxf_path, job_path=None, *, profile=None, layers=None, out_dir=None, force: bool = False,
               replace: bool = False):
    """``lacuna check``: the voids drawn by hand against the rules; writes the marked copy and the JSON.

    Returns the :class:`toolkit.checking.CheckResult` (its ``exit_code`` is 1 when anything is violated) with
    ``summary["outputs"]`` filled in. With nothing to check only the JSON is written.
    """
    from .checking import check_drawing, check_outputs

    dxf_path = Path(dxf_path)
    result = check_drawing(dxf_path, job_path, profile=profile, layers=layers)
    files = check_outputs(result, dxf_path, replace=replace) if result.voids else {}
    json_name = f"{dxf_path.stem}-check.json"
    files.pop(json_name, None)
    out = Path(out_dir) if out_dir is not None else default_out_dir(dxf_path)
    inputs = [dxf_path] + ([Path(job_path)] if job_path else [])
    _finish(result.summary, files, json_name, out, inputs, force)
    return result


def optimize_plan(job_path):
    """The job's optimiser settings (iteration cap, volume target, evolution rate, convergence window) for a
    progress line's estimate of the time left; the defaults where the job cannot be read yet."""
    from .jobfile import read_job
    from .optimize import OptimizeSettings

    try:
        return read_job(job_path).optimize if job_path else OptimizeSettings()
    except LacunaError:
        return OptimizeSettings()  # the real reading reports the fault


def convert_file(source, target, *, layers: str | None = None, units: str | None = None,
                 force: bool = False) -> list[str]:
    """``lacuna convert``: one file to another, written whole; returns the lines to print."""
    from .convert import convert

    source, target = Path(source), Path(target)
    names = [n.strip() for n in layers.split(",") if n.strip()] if layers else None
    notes: list[str] = []
    data = convert(source, target, layers=names, units=units, messages=notes)
    write_outputs(target.parent if str(target.parent) else Path("."), {target.name: data}, inputs=[source],
                  force=force)
    return [f"  note: {n}" for n in notes] + [f"wrote {target}"]


@dataclass(frozen=True, eq=False)
class Result:
    """What :func:`optimize_document` did: the whole run, its JSON summary, and the handles it added."""

    run: OptimizeRun
    summary: dict
    handles: dict


def _job_from(job):
    from .jobfile import Job, parse_job, read_job

    if isinstance(job, Job):
        return job
    if isinstance(job, (str, Path)) and Path(job).suffix.lower() == ".toml" and Path(job).is_file():
        return read_job(job)
    if isinstance(job, str):
        return parse_job(job, source="job text")
    raise LacunaError(
        f"a job must be a toolkit.jobfile.Job, a path to a .toml job file or TOML text, got {type(job).__name__}.",
        where="optimize_document(job=...)",
        hint="Pass read_job('job.toml') or the file's path.",
    )


def optimize_document(doc, job, *, on_iteration=None, replace: bool = False) -> Result:
    """The whole job on an ezdxf document a CAD host already holds; adds the LACUNA-* layers IN PLACE.

    ``job``: a :class:`toolkit.jobfile.Job`, a job-file path or TOML text. Nothing is written to disk; saving the
    document is the host's business. ``replace`` lets a second run replace the entities of an earlier one.
    """
    from .dxf_in import read_document
    from .dxf_out import add_results
    from .inputs import build_panel_with_notes

    job = _job_from(job)
    drawing = read_document(doc, job.layers, path=getattr(doc, "filename", None) or "<document>")
    panel, notes = build_panel_with_notes(drawing, job)
    if notes:
        drawing = dataclasses.replace(drawing, warnings=tuple(drawing.warnings) + tuple(notes))
    run = optimize_panel(panel, job, on_iteration=on_iteration)
    summary = optimize_summary(run, drawing)
    added = add_results(doc, panel.frame, voids=run.voids, freeform=list(run.freeform), notes=_notes(run),
                        panel_size_mm=(panel.width_mm, panel.height_mm),
                        check_markers=[v.to_json() for v in run.rationalised.violations], replace=replace)
    return Result(run=run, summary=summary, handles=dict(added.handles))


def demo_files() -> tuple[Path, Path]:
    """The bundled demo drawing and its job file (inside the installed package)."""
    base = resources.files("toolkit") / "data" / "demo"
    return Path(str(base / f"{DEMO_NAME}.dxf")), Path(str(base / f"{DEMO_NAME}.toml"))


def run_demo(out_dir, *, force: bool = False, on_iteration=None) -> Outcome:
    """``lacuna demo``: the whole job on the bundled loft lintel: the solid panel's analysis, then the
    optimisation; both sets of files in ``out_dir``. The summary is the optimisation's, listing every file."""
    dxf, job = demo_files()
    out_dir = Path(out_dir)
    # Both steps are checked against the folder before either writes, so a refused run writes nothing.
    stem = dxf.stem
    plan_outputs(out_dir, [f"{stem}-analysis.json", f"{stem}-optimize.json"], inputs=[dxf, job], force=force)
    analysed = analyze_file(dxf, job, out_dir=out_dir, force=force)
    optimised = optimize_file(dxf, job, out_dir=out_dir, force=force, on_iteration=on_iteration)
    optimised.summary["outputs"] = analysed.summary["outputs"] + optimised.summary["outputs"]
    return optimised


def write_starter(directory, *, force: bool = False) -> list[Path]:
    """``lacuna init``: a commented job-file template and a sample drawing to start from."""
    directory = Path(directory)
    sample = resources.files("toolkit") / "data" / "sample-panel.dxf"
    files = {"job.toml": template_text(), "sample-panel.dxf": sample.read_bytes()}
    return write_outputs(directory, files, inputs=[], force=force)
