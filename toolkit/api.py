"""What the commands do, as functions a script or a CAD host can call: drawing + job in, figures and files out."""

from __future__ import annotations

import datetime as _dt
import shutil
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path

import numpy as np

from . import CAUTION, __version__
from .analysis import Analysis, analyze
from .errors import LacunaError
from .inputs import load_panel
from .jobfile import template_text
from .model import Drawing, Panel
from .outputs import default_out_dir, plan_outputs, write_atomic, write_outputs
from .svg_out import analysis_svg

DEMO_NAME = "loft-lintel"


@dataclass
class Outcome:
    """What a command produced: the JSON summary and the files written."""

    summary: dict
    paths: list[Path] = field(default_factory=list)

    def text_lines(self) -> list[str]:
        s = self.summary
        lines = [f"{s.get('panel', 'panel')}: {s['elements']} elements"]
        lines.append(f"  compliance            {s['compliance_Nmm']:.6g} N mm")
        lines.append(f"  largest deflection    {s['max_deflection_mm']:.4g} mm")
        lines.append(f"  largest von Mises     {s['max_von_mises_MPa']:.4g} MPa")
        lines.append(
            f"  loads / reactions     [{s['load_sum_kN'][0]:.4g}, {s['load_sum_kN'][1]:.4g}] / "
            f"[{s['reaction_sum_kN'][0]:.4g}, {s['reaction_sum_kN'][1]:.4g}] kN"
        )
        lines += [f"  warning: {w}" for w in s.get("warnings", [])]
        lines += [f"  wrote {p}" for p in s.get("outputs", [])]
        lines.append(f"  caution: {CAUTION}")
        return lines


def _drawing_xy(panel: Panel, local_xy) -> list[float]:
    return [float(v) for v in panel.frame.to_drawing(np.asarray(local_xy, dtype=float))]


def _drawing_kN(panel: Panel, vector_N) -> list[float]:
    return [float(v) / 1000.0 for v in panel.frame.vector_to_drawing(np.asarray(vector_N, dtype=float))]


def analysis_summary(panel: Panel, drawing: Drawing | None, result: Analysis) -> dict:
    """The JSON of ``lacuna analyze`` (CONTRACT.md keys first). Positions and force sums in the drawing's axes."""
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
        "warnings": list((drawing.warnings if drawing else ()) + result.warnings),
        "caution": CAUTION,
        "outputs": [],
    }
    return summary


def analysis_figures(panel: Panel, result: Analysis, *, date: str | None = None) -> dict[str, str]:
    """One SVG per load case: file-name suffix -> SVG text."""
    figures = {}
    for i, case in enumerate(result.cases):
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
    import json

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


def demo_files() -> tuple[Path, Path]:
    """The bundled demo drawing and its job file (inside the installed package)."""
    base = resources.files("toolkit") / "data" / "demo"
    return Path(str(base / f"{DEMO_NAME}.dxf")), Path(str(base / f"{DEMO_NAME}.toml"))


def run_demo(out_dir, *, force: bool = False) -> Outcome:
    """``lacuna demo``: the whole job on the bundled loft lintel."""
    dxf, job = demo_files()
    return analyze_file(dxf, job, out_dir=out_dir, force=force)


def write_starter(directory, *, force: bool = False) -> list[Path]:
    """``lacuna init``: a commented job-file template and a sample drawing to start from."""
    directory = Path(directory)
    sample = resources.files("toolkit") / "data" / "sample-panel.dxf"
    files = {"job.toml": template_text(), "sample-panel.dxf": sample.read_bytes()}
    return write_outputs(directory, files, inputs=[], force=force)
