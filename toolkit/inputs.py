"""The panel the analysis sees: a drawing's geometry and markers, completed and overridden by a job file.

The rule (CONTRACT.md: "when both give a value the job file wins") is applied per kind, not per item:
if the job file has any ``[[support]]``, they replace ALL the drawing's support markers; if it has any
``[[load]]``, they replace ALL its load markers. Matching a job entry to "the same" marker would need a
tolerance and would silently mix two sources, so we do not try. Overridden markers are reported as notes.

Job positions are along the drawing's axes in mm (the job reader has applied the job's units); here they are
put in the drawing's own unit and through the drawing's :class:`~toolkit.model.Frame`, so a rotated panel far
from the origin is handled the same way its outline was. Forces turn with the frame and are not scaled.
Support fixity letters already name the panel's local axes, so they pass unchanged.
"""

from __future__ import annotations

import difflib
import warnings
from dataclasses import replace
from pathlib import Path

from .errors import LacunaError
from .jobfile import Job, default_job, read_job
from .model import Drawing, Frame, LineLoad, Load, Panel, PointLoad, Support


def build_panel(drawing: Drawing, job: Job) -> Panel:
    """The analysable panel from ``drawing`` (local frame) and ``job`` (drawing axes, mm / N).

    Notes on what was overridden or looks mistaken are issued as Python warnings (``UserWarning``);
    :func:`load_panel` returns them in the drawing's ``warnings`` instead.
    """
    panel, notes = _assemble(drawing, job)
    for note in notes:
        warnings.warn(note, UserWarning, stacklevel=2)
    return panel


def build_panel_with_notes(drawing: Drawing, job: Job) -> tuple[Panel, list[str]]:
    """As :func:`build_panel`, returning the notes (overridden markers, unused case weights) as a list."""
    return _assemble(drawing, job)


def load_panel(dxf_path, job_path=None, *, job: Job | None = None) -> tuple[Panel, Job, Drawing]:
    """Read the job file (or take the defaults), read the drawing with the job's layers, build the panel.

    ``job``, when given, is a job already read (a sweep changes its volume fraction or profile) and is used
    instead of reading ``job_path``. The returned drawing's ``warnings`` carry the drawing reader's notes followed
    by this stage's (overridden markers, unused case weights); the job's own warnings stay in ``job.warnings``.
    """
    # Imported here so the job side of this module works before and without the DXF reader's import cost.
    from .dxf_in import read_drawing

    if job is None:
        job = read_job(job_path) if job_path is not None else default_job()
    drawing = read_drawing(dxf_path, job.layers)
    panel, notes = _assemble(drawing, job)
    if notes:
        drawing = replace(drawing, warnings=tuple(drawing.warnings) + tuple(notes))
    return panel, job, drawing


def check_panel(drawing: Drawing, job: Job) -> tuple[Panel, list[str]]:
    """The panel for a fabrication-rule check, and this stage's notes: like :func:`build_panel`, but no
    material is needed (a check never analyses). Without one in the job, the panel's ``material`` is None."""
    return _assemble(drawing, job, need_material=False)


# --- the pieces ---------------------------------------------------------------------------------------------


def _assemble(drawing: Drawing, job: Job, *, need_material: bool = True) -> tuple[Panel, list[str]]:
    notes: list[str] = []
    frame = drawing.frame
    job_name = job.source or "the job file"

    if job.material is None and need_material:
        raise LacunaError(
            "no material is given: the analysis needs Young's modulus and Poisson's ratio.",
            where=f"{job_name} [material]" if job.source else "[material]",
            hint="Add a [material] table with E_MPa and nu (and density_kg_m3 for mass figures) to the job file; "
            "`lacuna init` writes a template.",
        )
    if job.panel.thickness_mm is None:
        raise LacunaError(
            "the panel thickness is not given.",
            where=f"{job_name} [panel] thickness" if job.source else "[panel] thickness",
            hint="Add thickness = <out-of-plane thickness> under [panel] in the job file.",
        )

    supports = _job_wins("support", job.supports, drawing.supports, lambda s: _support_to_local(s, frame),
                         job_name, notes)
    loads = _job_wins("load", job.loads, drawing.loads, lambda item: _load_to_local(item, frame), job_name, notes)

    notes += _case_notes(loads, job.case_weights, job_name)
    travels = _travels(drawing, job, loads)

    panel = Panel(
        width_mm=drawing.width_mm,
        height_mm=drawing.height_mm,
        thickness_mm=job.panel.thickness_mm,
        material=job.material,
        openings=tuple(drawing.openings),
        keep=tuple(drawing.keep),
        supports=supports,
        loads=loads + travels.loads,
        case_weights=tuple(job.case_weights) + travels.case_weights,
        travels=travels.travels,
        self_weight=job.panel.self_weight,
        element_size_mm=job.panel.element_size_mm,
        frame=frame,
        name=job.panel.name or Path(drawing.path).stem or "panel",
        source=drawing.path,
    )
    return panel, notes


def _travels(drawing: Drawing, job: Job, loads):
    """The job's travelling loads as load cases in the local frame, their paths checked to lie on the panel and
    their stops counted against the memory an analysis of so many cases needs (toolkit.moving)."""
    from . import moving

    if not job.moving_loads:
        return moving.Expanded(loads=(), case_weights=(), travels=())
    import shapely
    from shapely.geometry import box

    from .fe.grid import grid_shape

    frame = drawing.frame
    solid = box(0.0, 0.0, drawing.width_mm, drawing.height_mm)
    if drawing.openings:
        solid = shapely.difference(solid, shapely.union_all([o.shape for o in drawing.openings]))
    moving.check_on_panel(job.moving_loads, [_points_to_local((m.start, m.end), frame) for m in job.moving_loads],
                          solid, frame)
    static = list(dict.fromkeys(load.case for load in loads))
    nx, ny = grid_shape(drawing.width_mm, drawing.height_mm, job.panel.element_size_mm)
    moving.check_memory(moving.stop_counts(job.moving_loads), nx=nx, ny=ny, dx=drawing.width_mm / nx,
                        dy=drawing.height_mm / ny, other_cases=len(static), stage="analysis")
    expanded = moving.expand(job.moving_loads, static, [name for name, _ in job.case_weights])
    travels = tuple(replace(t, at=_points_to_local(t.at, frame)) for t in expanded.travels)
    return moving.Expanded(loads=tuple(_load_to_local(item, frame) for item in expanded.loads),
                           case_weights=expanded.case_weights, travels=travels)


def _job_wins(kind: str, from_job, from_drawing, to_local, job_name: str, notes: list[str]) -> tuple:
    """The job's items of ``kind`` (mapped to the local frame) if it has any, else the drawing's markers."""
    if not from_job:
        return tuple(from_drawing)
    if from_drawing:
        notes.append(f"{len(from_drawing)} {kind} marker(s) on the drawing were overridden by the "
                     f"{len(from_job)} [[{kind}]] table(s) of {job_name}.")
    return tuple(to_local(item) for item in from_job)


def _points_to_local(points_mm, frame: Frame) -> tuple[tuple[float, float], ...]:
    """Drawing-axis points in mm -> local mm: into the drawing's unit first, then through the frame."""
    local = []
    for x, y in points_mm:
        u, v = frame.to_local((x / frame.mm_per_unit, y / frame.mm_per_unit))
        local.append((float(u), float(v)))
    return tuple(local)


def _vector_to_local(vector, frame: Frame) -> tuple[float, float]:
    u, v = frame.vector_to_local(vector)
    return (float(u), float(v))


def _support_to_local(support: Support, frame: Frame) -> Support:
    return Support(points=_points_to_local(support.points, frame), fix=support.fix, source=support.source)


def _load_to_local(load: Load, frame: Frame) -> Load:
    if isinstance(load, PointLoad):
        (at,) = _points_to_local((load.at,), frame)
        return PointLoad(at=at, force_N=_vector_to_local(load.force_N, frame), case=load.case, source=load.source)
    start, end = _points_to_local((load.start, load.end), frame)
    return LineLoad(start=start, end=end, intensity_N_per_mm=_vector_to_local(load.intensity_N_per_mm, frame),
                    case=load.case, source=load.source)


def _case_notes(loads, case_weights, job_name: str) -> list[str]:
    """Case weights that name no load, and loads whose case has no weight while others do: likely typos."""
    if not case_weights:
        return []
    weighted = [name for name, _ in case_weights]
    used = list(dict.fromkeys(load.case for load in loads))
    notes = []
    for name in weighted:
        if name not in used:
            near = difflib.get_close_matches(name, used, n=1, cutoff=0.6)
            guess = f' (did you mean "{near[0]}"?)' if near else ""
            notes.append(f'{job_name} [cases] {name}: no load belongs to case "{name}"{guess}; its weight is unused.')
    for name in used:
        if name not in weighted:
            near = difflib.get_close_matches(name, weighted, n=1, cutoff=0.6)
            guess = f' (did you mean "{near[0]}"?)' if near else ""
            notes.append(f'load case "{name}" has no weight under [cases] in {job_name}{guess}; it counts with '
                         "weight 1.")
    return notes
