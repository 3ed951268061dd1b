"""What the commands do, as functions a script or a CAD host can call: drawing + job in, figures and files out."""

from __future__ import annotations

import dataclasses
import datetime as _dt
import json
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

from .about import CAUTION
from .analysis import Analysis, analyze
from .inputs import load_panel
from .jobfile import template_text
from .errors import LacunaError
from .model import Panel
from .pipeline import OptimizeRun, optimize_panel
from .write.analysis_figure import analysis_svg
from .write.files import default_out_dir, plan_outputs, write_outputs
from .write.report import IMPERIAL, MM_PER_INCH, report_markdown
from .write.schedule import schedule_csv
from .write.summary import analysis_summary, drawing_notes, optimize_summary

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
        f"  largest deflection    {s['max_deflection_mm']:.4g} mm"
        + (f" ({s['max_deflection_mm'] / MM_PER_INCH:.4g} in)" if s.get("units") in IMPERIAL else ""),
        f"  largest von Mises     {s['max_von_mises_MPa']:.4g} MPa",
        f"  loads / reactions     [{s['load_sum_kN'][0]:.4g}, {s['load_sum_kN'][1]:.4g}] / "
        f"[{s['reaction_sum_kN'][0]:.4g}, {s['reaction_sum_kN'][1]:.4g}] kN"
        + (f" (self-weight {s['self_weight_kN']:.4g} kN among the loads)" if s.get("self_weight_kN") else ""),
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
    if s.get("units") in IMPERIAL:
        lines.append(f"  {'largest deflection, in':22s}{sol['max_deflection_mm'] / MM_PER_INCH:14.4g}"
                     f"{s['max_deflection_freeform_mm'] / MM_PER_INCH:14.4g}"
                     f"{s['max_deflection_rationalized_mm'] / MM_PER_INCH:14.4g}")
    lines.append(f"  {'material removed':22s}{'0 %':>14s}{s['mass_removed_freeform_percent']:12.1f} %"
                 f"{s['mass_removed_percent']:12.1f} %")
    if s.get("capture_percent") is not None:
        lines.append(f"  {'kept of the saving':22s}{'':14s}{'':14s}{s['capture_percent']:12.1f} %")
    if sol.get("self_weight_kN"):
        lines.append(f"  self-weight {sol['self_weight_kN']:.4g} kN as drawn, in every case; the optimiser weighs only "
                     "the material it keeps")
    lines.append(f"  {len(s['voids'])} voids; rules {s['rules']['profile']}: "
                 f"{len(s['rules']['violations'])} violations")
    edged = [v for v in s["voids"] if v.get("peak_stress_MPa") is not None]
    if edged:
        top = max(edged, key=lambda v: v["peak_stress_MPa"])
        # the nominal beside Kt: a large Kt over a small nominal stress is a void where little was carried
        kt = (f", nominal {top['nominal_stress_MPa']:.3g} MPa, Kt {top['kt']:.2f}"
              if top.get("kt") is not None and top.get("nominal_stress_MPa") is not None else "")
        lines.append(f"  largest edge stress   {top['peak_stress_MPa']:.4g} MPa at {top['id']} "
                     f"({top['peak_stress_sense']}{kt}; local models of the voids)")
    for t in s.get("moving_loads", []):
        lines.append(f"  travelling load {t['case']}: {t['stops']} stops; largest compliance over them "
                     f"{t['compliance_solid_max_Nmm']:.6g} / {t['compliance_freeform_max_Nmm']:.6g} / "
                     f"{t['compliance_rationalized_max_Nmm']:.6g} N mm (solid / freeform / to make)")
    if s.get("limit"):
        lines.append(f"  limit: {s['limit']}")
    if s.get("capture_ceiling"):
        lines.append(f"  ceiling: {s['capture_ceiling']}")
    return lines


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


# What ``optimize_file`` writes for a drawing <stem>, besides the frames: <stem>-<suffix> each.
OPTIMIZE_OUTPUTS = ("lacuna.dxf", "result.svg", "layout.svg", "convergence.svg", "schedule.csv", "schedule.json",
                    "report.md", "optimize.json")


def optimize_file(dxf_path, job_path=None, *, out_dir=None, force: bool = False, frames: int = 0,
                  on_iteration=None, dxf_version: str | None = None, replace: bool = False, job=None,
                  on_stage=None, helper: bool = False) -> Outcome:
    """``lacuna optimize``: the whole job; writes the drawing copy with our layers, figures, schedule, JSON.

    ``job``: a :class:`toolkit.jobfile.Job` already read (a sweep's point), used instead of reading ``job_path``.
    ``on_iteration``, ``on_stage`` and ``helper`` (a second process for part of the fitting, off by default: see
    ``toolkit.helper`` before turning it on from a script): as ``pipeline.optimize_panel`` takes them."""
    from .write.convergence_plot import convergence_svg
    from .write.dxf_copy import refuse_earlier_results, result_copy_bytes
    from .write.layout_frame import layout_frame_svg
    from .write.result_sheet import result_svg

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
    run = optimize_panel(panel, job, on_iteration=on_iteration, keep_every=frames, on_stage=on_stage, helper=helper)
    if on_stage is not None:
        on_stage("writing the drawing copy, the figures, the schedule and the report")
    summary = optimize_summary(run, drawing)
    date = _dt.date.today().isoformat()
    grid = run.solid.grid
    files: dict[str, bytes | str] = {}
    files[f"{stem}-lacuna.dxf"] = result_copy_bytes(
        dxf_path, panel.frame, voids=run.voids, freeform=list(run.freeform),
        notes=drawing_notes(run), panel_size_mm=(panel.width_mm, panel.height_mm), dxf_version=dxf_version,
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


def optimize_document(doc, job, *, on_iteration=None, replace: bool = False, on_stage=None) -> Result:
    """The whole job on an ezdxf document a CAD host already holds; adds the LACUNA-* layers IN PLACE.

    ``job``: a :class:`toolkit.jobfile.Job`, a job-file path or TOML text. Nothing is written to disk; saving the
    document is the host's business. ``replace`` lets a second run replace the entities of an earlier one.
    """
    from .dxf_in import read_document
    from .write.dxf_copy import add_results
    from .inputs import build_panel_with_notes

    job = _job_from(job)
    drawing = read_document(doc, job.layers, path=getattr(doc, "filename", None) or "<document>")
    panel, notes = build_panel_with_notes(drawing, job)
    if notes:
        drawing = dataclasses.replace(drawing, warnings=tuple(drawing.warnings) + tuple(notes))
    run = optimize_panel(panel, job, on_iteration=on_iteration, on_stage=on_stage)
    summary = optimize_summary(run, drawing)
    added = add_results(doc, panel.frame, voids=run.voids, freeform=list(run.freeform), notes=drawing_notes(run),
                        panel_size_mm=(panel.width_mm, panel.height_mm),
                        check_markers=[v.to_json() for v in run.rationalised.violations], replace=replace)
    return Result(run=run, summary=summary, handles=dict(added.handles))


def demo_files() -> tuple[Path, Path]:
    """The bundled demo drawing and its job file (inside the installed package)."""
    base = resources.files("toolkit") / "data" / "demo"
    return Path(str(base / f"{DEMO_NAME}.dxf")), Path(str(base / f"{DEMO_NAME}.toml"))


def run_demo(out_dir, *, force: bool = False, on_iteration=None, on_stage=None, helper: bool = False) -> Outcome:
    """``lacuna demo``: the whole job on the bundled loft lintel: the solid panel's analysis, then the
    optimisation; both sets of files in ``out_dir``. The summary is the optimisation's, listing every file."""
    dxf, job = demo_files()
    out_dir = Path(out_dir)
    # Both steps are checked against the folder before either writes, so a refused run writes nothing.
    stem = dxf.stem
    plan_outputs(out_dir, [f"{stem}-analysis.json", f"{stem}-optimize.json"], inputs=[dxf, job], force=force)
    analysed = analyze_file(dxf, job, out_dir=out_dir, force=force)
    optimised = optimize_file(dxf, job, out_dir=out_dir, force=force, on_iteration=on_iteration, on_stage=on_stage,
                              helper=helper)
    optimised.summary["outputs"] = analysed.summary["outputs"] + optimised.summary["outputs"]
    return optimised


def write_starter(directory, *, force: bool = False) -> list[Path]:
    """``lacuna init``: a commented job-file template and a sample drawing to start from."""
    directory = Path(directory)
    sample = resources.files("toolkit") / "data" / "sample-panel.dxf"
    files = {"job.toml": template_text(), "sample-panel.dxf": sample.read_bytes()}
    return write_outputs(directory, files, inputs=[], force=force)
