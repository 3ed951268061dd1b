"""`lacuna sweep`: the trade-off curve of one panel, made mass against compliance and largest deflection over
volume fractions (and fabrication profiles), each point a whole job on the Dask engine of toolkit.batch.

The knee of each profile's curve is found by the idea of Kneedle (Satopää, Albrecht, Irwin and Raghavan, "Finding
a 'Kneedle' in a haystack: detecting knee points in system behavior", ICDCS workshops 2011): both axes are scaled
to [0, 1] over the points, and the knee is the inner point farthest from the chord joining the two end points, on
the side of diminishing returns (below the chord: stiffer than the straight trade between the ends). With the
axes scaled, this is the point past which each further kilogram buys least stiffness. See docs/batch.md.

A point another point of its profile beats on both counts (no heavier and of no more compliance, lighter or of
less) is **dominated**: no one would choose it. Under fixed loads that happens only where the voids to make fall out
unevenly; under self-weight the panel may get stiffer as it gets lighter (the weight goes too), and the heavy end
of the curve is dominated as a rule. Such points are named with the point that beats them, and the knee is looked
for among the others.
"""

from __future__ import annotations

import csv
import io
import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .about import CAUTION, __version__
from .batch import DONE, STATUS_EXIT, VIOLATED, JobsResult, dask_client, optimize_task, run_tasks
from .errors import LacunaError

MAX_POINTS = 200  # volume fractions times profiles: each point is a whole job


def parse_volumes(text: str) -> list[float]:
    """``START:STOP:COUNT`` -> COUNT volume fractions evenly from START to STOP, both kept; each in (0, 1)."""
    where = "--volume"
    hint = "Write START:STOP:COUNT, e.g. 0.9:0.4:6 (six volume fractions from 0.9 down to 0.4)."
    parts = str(text).split(":")
    if len(parts) != 3:
        raise LacunaError(f"{text!r} is not START:STOP:COUNT.", where=where, hint=hint)
    try:
        start, stop = float(parts[0]), float(parts[1])
    except ValueError:
        raise LacunaError(f"{text!r}: START and STOP must be numbers.", where=where, hint=hint) from None
    try:
        count = int(parts[2])
    except ValueError:
        raise LacunaError(f"{text!r}: COUNT must be a whole number.", where=where, hint=hint) from None
    for name, value in (("START", start), ("STOP", stop)):
        if not (math.isfinite(value) and 0.0 < value < 1.0):
            raise LacunaError(
                f"{name} = {parts[0 if name == 'START' else 1]} is not a volume fraction: it must lie strictly "
                "between 0 and 1 (the share of the design region kept solid).", where=where, hint=hint)
    if count < 2:
        raise LacunaError(f"COUNT = {count}: a trade-off curve needs at least 2 points.", where=where, hint=hint)
    if count > MAX_POINTS:
        raise LacunaError(f"COUNT = {count}: more than {MAX_POINTS} points, each a whole job.", where=where,
                          hint="Sweep fewer points, or sweep a narrower range in a second run.")
    if start == stop:
        raise LacunaError(f"START and STOP are both {start:g}: the sweep would repeat one point.", where=where,
                          hint=hint)
    return [float(v) for v in np.round(np.linspace(start, stop, count), 6)]


def parse_profiles(text: str | None) -> list[str | None]:
    """``A,B`` -> the profile names, each known to `lacuna profiles`; None -> [None] (the job's own rules)."""
    from .rules.profiles import load_profile

    if text is None:
        return [None]
    names = [n.strip() for n in str(text).split(",")]
    if not any(names):
        raise LacunaError("no profile is named.", where="--profile",
                          hint="Name one or more profiles, comma-separated; `lacuna profiles` lists them.")
    if "" in names:
        raise LacunaError(f"{text!r} holds an empty profile name.", where="--profile",
                          hint="Separate the names by single commas, e.g. timber-bored,steel-cut.")
    for name in names:
        try:
            load_profile(name)
        except LacunaError as error:
            raise LacunaError(error.message, where="--profile", hint=error.hint) from None
    if len(set(names)) != len(names):
        raise LacunaError(f"{text!r} names a profile twice.", where="--profile", hint="Name each profile once.")
    return names


def knee_index(x, y) -> int | None:
    """Index of the knee of the curve through (x[i], y[i]) (Kneedle's idea, see the module text), or None.

    Points are taken in order of x; both axes are scaled to [0, 1]; the knee is the inner point farthest below
    the chord through the first and last points. None with fewer than three points, a flat axis, or no inner
    point below the chord (a straight or bending-the-other-way curve has no knee of diminishing returns)."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if x.size < 3 or x.shape != y.shape or not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))):
        return None
    order = np.argsort(x, kind="stable")
    xs, ys = x[order], y[order]
    xr, yr = xs[-1] - xs[0], ys.max() - ys.min()
    if xr <= 0 or yr <= 0:
        return None
    xn, yn = (xs - xs[0]) / xr, (ys - ys.min()) / yr
    chord = yn[0] + (yn[-1] - yn[0]) * xn
    below = chord - yn  # vertical distance below the chord; the perpendicular one is proportional to it
    below[0] = below[-1] = 0.0
    k = int(np.argmax(below))
    return int(order[k]) if below[k] > 1e-9 else None


def dominated_by(mass, compliance) -> list[int | None]:
    """For each point, the index of the point of least compliance among those no heavier and of no more compliance
    that are lighter or of less (ties to the lighter, then the first), or None where no point is."""
    m = np.asarray(mass, dtype=float)
    c = np.asarray(compliance, dtype=float)
    out: list[int | None] = []
    for i in range(m.size):
        beats = np.flatnonzero((m <= m[i]) & (c <= c[i]) & ((m < m[i]) | (c < c[i])))
        out.append(int(min(beats, key=lambda j: (c[j], m[j], j))) if beats.size else None)
    return out


@dataclass
class SweepResult(JobsResult):
    """What :func:`sweep_file` did: one row per point (profile by profile, volumes in the order given)."""

    def text_lines(self) -> list[str]:
        s = self.summary
        mass = "made mass, kg" if s["mass_unit"] == "kg" else "made mass, % of solid"
        lines = [f"{s['panel']}: {len(self.rows)} points"]
        lines.append(f"  {'profile':16s}{'volume':>8s}{mass:>24s}{'compliance, N mm':>18s}"
                     f"{'deflection, mm':>16s}  status")
        for r in self.rows:
            m = r["made_mass_kg"] if s["mass_unit"] == "kg" else r["made_mass_percent"]
            fig = lambda v, f: "" if v is None else f.format(v)  # noqa: E731
            lines.append(f"  {r['profile']:16s}{r['volume_fraction']:8.3f}{fig(m, '{:24.4g}')}"
                         f"{fig(r['compliance_Nmm'], '{:18.6g}')}{fig(r['max_deflection_mm'], '{:16.4g}')}  "
                         f"{r['status']}{'  <- knee' if r['knee'] else ''}"
                         + (f"  (heavier and of more compliance than {r['dominated_by']:.3g})" if r["dominated_by"] is not None
                            else ""))
            if r["message"]:
                lines.append(f"    {r['message']}")
        lines.append(f"  knee: {s['knee_method']}")
        lines += [f"  wrote {p}" for p in s["outputs"]]
        lines.append(f"  caution: {CAUTION}")
        return lines


def _label(profile: str | None, job_profile: str | None) -> str:
    return profile or job_profile or "job rules"


def sweep_file(drawing, job_path=None, *, volumes, profiles=None, out_dir=None, scheduler: str | None = None,
               workers: int | None = None, force: bool = False, on_done=None) -> SweepResult:
    """``lacuna sweep``: the whole job at each volume fraction (and profile) on Dask; each point's files in its own
    folder, then ``<stem>-sweep.csv``, ``.svg`` (the trade-off plot, knee marked) and ``.json`` in ``out_dir``
    (default: ``<stem>-sweep`` beside the drawing).

    ``volumes``: ``"START:STOP:COUNT"`` or a list of fractions in (0, 1); ``profiles``: ``"A,B"``, a list of
    names, or None for the job's own rules. A profile replaces the job's ``[rules] profile``; the job's own rule
    values stay over it. Bad input raises LacunaError before anything is written or started."""
    import dataclasses

    from .inputs import load_panel
    from .pipeline import job_rules
    from .write.files import plan_outputs, write_outputs
    from .write.tradeoff_plot import tradeoff_svg

    volume_list = parse_volumes(volumes) if isinstance(volumes, str) else _checked_volumes(volumes)
    profile_list = parse_profiles(profiles) if profiles is None or isinstance(profiles, str) else \
        parse_profiles(",".join(profiles))
    if len(volume_list) * len(profile_list) > MAX_POINTS:
        raise LacunaError(f"{len(volume_list)} volumes x {len(profile_list)} profiles is more than {MAX_POINTS} "
                          "points, each a whole job.", where="--volume", hint="Sweep fewer points.")
    drawing = Path(drawing)
    panel, job, _drawing = load_panel(drawing, job_path)  # a bad drawing or job stops here, with its paragraph
    for p in profile_list:  # so do the job's rules under each profile (an unknown profile in the job, say)
        job_rules(job if p is None else dataclasses.replace(job, rules=dataclasses.replace(job.rules, profile=p)))
    out = Path(out_dir) if out_dir is not None else drawing.with_name(f"{drawing.stem}-sweep")
    inputs = [drawing] + ([Path(job_path)] if job_path else [])
    stem = drawing.stem
    names = [f"{stem}-sweep.csv", f"{stem}-sweep.svg", f"{stem}-sweep.json"]
    plan_outputs(out, names, inputs=inputs, force=force)
    points = [(p, v) for p in profile_list for v in volume_list]
    folders = [out / f"{_label(p, job.rules.profile)}-vf{v:.3f}" for p, v in points]
    for folder in folders:
        if folder.is_dir() and any(folder.iterdir()) and not force:
            raise LacunaError(f"the point's folder {folder} already holds files.",
                              hint="Choose another --out folder, or pass --force to replace them.")

    rho = panel.material.density_kg_m3 if panel.material is not None else None
    solid_kg = float(panel.solid.area) * panel.thickness_mm * 1e-9 * rho if rho else None
    tasks = [{"drawing": str(drawing.resolve()), "job": str(Path(job_path).resolve()) if job_path else None,
              "out_dir": str(f.resolve()), "force": force, "volume_fraction": v, "profile": p}
             for (p, v), f in zip(points, folders)]

    def progress(k, row, done, total):
        if on_done is not None:
            on_done({**row, "panel": folders[k].name}, done, total)

    with dask_client(scheduler, workers) as client:
        results = run_tasks(client, optimize_task, tasks, on_done=progress)
    rows = [_row(r, p, v, f, job.rules.profile, solid_kg) for r, (p, v), f in zip(results, points, folders)]
    for label in dict.fromkeys(r["profile"] for r in rows):
        done = [r for r in rows if r["profile"] == label and r["status"] in (DONE, VIOLATED)]
        beaten = dominated_by([r["made_mass_percent"] for r in done], [r["compliance_Nmm"] for r in done])
        for r, b in zip(done, beaten):
            r["dominated_by"] = None if b is None else done[b]["volume_fraction"]
        front = [r for r, b in zip(done, beaten) if b is None]
        k = knee_index([r["made_mass_percent"] for r in front], [r["compliance_Nmm"] for r in front])
        if k is not None:
            front[k]["knee"] = True
    summary = {
        "command": "sweep",
        "lacuna_version": __version__,
        "panel": panel.name,
        "drawing": str(drawing),
        "mass_unit": "kg" if solid_kg else "percent",
        "solid_mass_kg": solid_kg,
        "volume_fractions": volume_list,
        "profiles": [_label(p, job.rules.profile) for p in profile_list],
        "knee_method": KNEE_METHOD,
        "rows": rows,
        "caution": CAUTION,
        "outputs": [],
    }
    targets = plan_outputs(out, names, inputs=inputs, force=force)
    summary["outputs"] = [str(t) for t in targets]
    files = {names[0]: sweep_csv(rows), names[1]: tradeoff_svg(rows, title=f"{panel.name}: trade-off",
                                                               mass_unit=summary["mass_unit"]),
             names[2]: json.dumps(summary, indent=2, allow_nan=False) + "\n"}
    paths = write_outputs(out, files, inputs=inputs, force=force)
    return SweepResult(rows=rows, summary=summary, paths=paths)


KNEE_METHOD = ("largest distance below the chord of the curve of compliance against made mass, both axes scaled "
               "to [0, 1] over the profile's points that no other point beats on both counts (the Kneedle idea, "
               "Satopaa et al. 2011); none where no inner point lies below the chord")


def _checked_volumes(volumes) -> list[float]:
    try:
        values = [float(v) for v in volumes]
    except (TypeError, ValueError):
        raise LacunaError(f"{volumes!r} is not a list of volume fractions.", where="volumes") from None
    if len(values) < 2 or not all(math.isfinite(v) and 0.0 < v < 1.0 for v in values):
        raise LacunaError(f"{volumes!r}: a sweep needs at least 2 volume fractions, each strictly between 0 and 1.",
                          where="volumes")
    if len(set(values)) != len(values):
        raise LacunaError(f"{volumes!r} repeats a volume fraction.", where="volumes")
    return values


def _row(result: dict, profile, volume: float, folder: Path, job_profile, solid_kg) -> dict:
    f = result.get("summary") or {}
    removed = f.get("mass_removed_percent")
    removed_kg = f.get("mass_removed_kg")
    return {
        "profile": _label(profile, job_profile) if not f else (f.get("profile") or _label(profile, job_profile)),
        "volume_fraction": volume,
        "status": result["status"],
        "exit_code": STATUS_EXIT[result["status"]],
        "volume_fraction_final": f.get("volume_fraction_final"),
        "made_mass_percent": None if removed is None else 100.0 - removed,
        "made_mass_kg": None if solid_kg is None or removed_kg is None else solid_kg - removed_kg,
        "mass_removed_percent": removed,
        "mass_removed_freeform_percent": f.get("mass_removed_freeform_percent"),
        "compliance_Nmm": f.get("compliance_rationalized_Nmm"),
        "compliance_solid_Nmm": f.get("compliance_solid_Nmm"),
        "stiffness_loss_percent": f.get("stiffness_loss_percent"),
        "max_deflection_mm": f.get("max_deflection_rationalized_mm"),
        "max_deflection_solid_mm": f.get("max_deflection_solid_mm"),
        "capture_percent": f.get("capture_percent"),
        "capture_ceiling_percent": f.get("capture_ceiling_percent"),
        "voids": f.get("voids"),
        "violations": f.get("violations"),
        "knee": False,
        "dominated_by": None,  # the volume fraction of the point that beats this one on both counts
        "message": result.get("message", ""),
        "folder": str(folder),
    }


SWEEP_COLUMNS = ("profile", "volume_fraction", "status", "exit_code", "volume_fraction_final", "made_mass_percent",
                 "made_mass_kg", "mass_removed_percent", "mass_removed_freeform_percent", "compliance_Nmm",
                 "compliance_solid_Nmm", "stiffness_loss_percent", "max_deflection_mm", "max_deflection_solid_mm",
                 "capture_percent", "capture_ceiling_percent", "voids", "violations", "knee", "dominated_by",
                 "message", "folder")


def sweep_csv(rows: list[dict]) -> str:
    """The sweep as CSV: one row per point; figures of the layout to make (rationalised), empty where none."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(SWEEP_COLUMNS)
    for r in rows:
        w.writerow(["" if r[c] is None else ("yes" if r[c] is True else "no" if r[c] is False else
                                             f"{r[c]:.6g}" if isinstance(r[c], float) else r[c])
                    for c in SWEEP_COLUMNS])
    return buf.getvalue()
