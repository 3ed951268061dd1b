"""Many whole jobs at once on Dask: `lacuna batch` (one panel per drawing) and the engine `lacuna sweep` shares.

Each panel is one task: the whole `lacuna optimize` job (toolkit.api.optimize_file) run in a Dask worker, which
writes the panel's own result folder, whole or not at all, and hands back the figures of its JSON summary, or
the paragraph that refused it. A refused or failed panel is a row of the summary; the others go on. The summary
tables (CSV, Markdown, JSON) are written last, once every panel is in.

By default the work runs on a ``distributed.LocalCluster`` of one single-threaded worker process per core: the
FE already keeps its own solver and BLAS on one thread (toolkit/fe/solve.py), so a panel per core is the way to
use the machine. ``scheduler`` names an existing Dask cluster instead; its workers must have lacuna installed
and see the drawings and the output folder at the same paths.
"""

from __future__ import annotations

import csv
import io
import json
import logging
import os
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

from .about import CAUTION, __version__
from .errors import LacunaError, one_paragraph
from .overlap import THREADS_ENV

SUMMARY_STEM = "batch-summary"

# Status words of a panel (the summary's ``status`` column) and the exit code each stands for.
DONE = "done"
VIOLATED = "rules violated"
REFUSED = "refused"          # bad input: the paragraph `lacuna optimize` would print, exit 2 on its own
FAILED = "failed"            # a fault of lacuna or of the cluster (a worker lost), not of the input
STATUS_EXIT = {DONE: 0, VIOLATED: 1, REFUSED: 2, FAILED: 3}


# --- the engine ------------------------------------------------------------------------------------------------


@contextmanager
def dask_client(scheduler: str | None = None, workers: int | None = None):
    """A ``distributed.Client``: on the cluster at ``scheduler`` (an address such as ``tcp://host:8786``), else
    on a new LocalCluster of ``workers`` processes (default: one per core), one thread each. Closed on exit."""
    from distributed import Client, LocalCluster

    if scheduler:
        try:
            client = Client(scheduler, timeout="10s")
        except (OSError, TimeoutError, ValueError) as error:
            raise LacunaError(
                f"no Dask scheduler answered at {scheduler!r} ({type(error).__name__}: {error}).",
                where="--scheduler",
                hint="Give the address the scheduler prints (e.g. tcp://10.0.0.5:8786), or leave --scheduler out "
                     "to run on this machine.",
            ) from None
        try:
            yield client
        finally:
            client.close()
        return
    import dask

    n = workers or os.cpu_count() or 1
    # The scheduler's small web server (the dashboard too, where bokeh is installed) on any free port: a fixed one
    # may be taken by another cluster, and Dask then warns on stderr. The cluster's own log is kept to critical
    # faults, so stderr carries the progress lines and nothing else: a job's own faults come back in its row, and a
    # Ctrl-C reaching the workers would otherwise print each one's broken connections. LOCAL_WORKER_CONFIG: see
    # there.
    with dask.config.set(LOCAL_WORKER_CONFIG):
        with _workers_ignore_ctrl_c():
            # One thread a job too: a job's checks would otherwise take a second thread (overlap.py) from a core
            # that another worker's panel is using.
            cluster = LocalCluster(n_workers=n, threads_per_worker=1, processes=True, dashboard_address=":0",
                                   silence_logs=logging.CRITICAL, env={THREADS_ENV: "1"})
        with cluster, Client(cluster) as client:
            yield client


@contextmanager
def _workers_ignore_ctrl_c():
    """Ctrl-C ignored while the local workers start, so the worker processes keep ignoring it (an ignored signal
    stays ignored in a new process): a Ctrl-C at the terminal reaches the whole process group, and this process
    alone should answer it, by closing the cluster, rather than every worker printing its own traceback."""
    import signal
    import threading

    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


# The local workers' settings: no statistical profiler (a stack sample of the running task every 10 ms, taken under
# the GIL, kept for a dashboard this cluster does not open); measured at 1 to 3 % of a demo job's CPU time, within
# the noise of a shared machine. Dask's own defaults hold BLAS, OpenMP and MKL to one thread in each worker.
LOCAL_WORKER_CONFIG = {"distributed.worker.profile.enabled": False}


def run_tasks(client, function, tasks: list[dict], on_done=None) -> list[dict]:
    """Run ``function(**task)`` for every task on the cluster; rows in the order of ``tasks``.

    ``on_done(index, row, done, total)`` is called in the order the tasks finish. A task that never came back (a worker
    lost) becomes a row with status FAILED and the cluster's message, beside the task's own keys."""
    from distributed import as_completed

    futures = [client.submit(function, pure=False, **task) for task in tasks]
    index = {f.key: i for i, f in enumerate(futures)}
    rows: list[dict | None] = [None] * len(tasks)
    for done, future in enumerate(as_completed(futures), start=1):
        i = index[future.key]
        try:
            row = future.result()
        except Exception as error:  # the worker died or the cluster went away: that panel failed, not the batch
            lost = (f"the job did not come back from its Dask worker ({type(error).__name__}: {error}); the worker "
                    "may have run out of memory or been stopped.")
            row = {**_task_keys(tasks[i]), "status": FAILED, "message": one_paragraph(lost)}
        rows[i] = row
        if on_done is not None:
            on_done(i, row, done, len(tasks))
        future.release()
    return rows  # type: ignore[return-value]


def _task_keys(task: dict) -> dict:
    return {"drawing": str(task["drawing"]), "job": str(task["job"]) if task.get("job") else "",
            "folder": str(task["out_dir"]), "volume_fraction": task.get("volume_fraction"),
            "profile": task.get("profile")}


def optimize_task(drawing: str, job: str | None, out_dir: str, force: bool = False,
                  volume_fraction: float | None = None, profile: str | None = None) -> dict:
    """One panel's whole job, as run in a worker: writes its folder, returns a row (never raises for bad input).

    ``volume_fraction`` and ``profile``, when given, replace the job's (a sweep's point)."""
    import dataclasses
    import time

    started = time.perf_counter()
    from . import api
    from .jobfile import default_job, read_job

    row = _task_keys(locals())
    try:
        adjusted = None
        if volume_fraction is not None or profile is not None:
            adjusted = read_job(job) if job else default_job()
            if volume_fraction is not None:
                adjusted = dataclasses.replace(
                    adjusted, optimize=dataclasses.replace(adjusted.optimize, volume_fraction=float(volume_fraction)))
            if profile is not None:
                adjusted = dataclasses.replace(adjusted, rules=dataclasses.replace(adjusted.rules, profile=profile))
        begun, cpu = time.perf_counter(), time.process_time()
        outcome = api.optimize_file(Path(drawing), Path(job) if job else None, out_dir=Path(out_dir), force=force,
                                    job=adjusted)
        row["seconds"] = time.perf_counter() - begun
        row["cpu_seconds"] = time.process_time() - cpu   # the worker process's CPU time over the job
        row["import_seconds"] = begun - started   # the worker's first task pays for importing lacuna
    except LacunaError as error:
        return {**row, "status": REFUSED, "message": one_paragraph(str(error))}
    except Exception as error:  # a defect of lacuna on this panel: say so in its row, keep the batch going
        return {**row, "status": FAILED, "message": one_paragraph(
            f"internal error ({type(error).__name__}: {error}); a fault in lacuna, not in the input: run "
            "`lacuna --debug optimize` on this drawing and report the traceback.")}
    s = outcome.summary
    violations = len(s["rules"]["violations"])
    return {**row, "status": VIOLATED if violations else DONE, "message": "", "summary": _figures(s)}


def _figures(s: dict) -> dict:
    """The figures a summary row shows, from an optimize JSON summary."""
    keys = ("panel", "units", "iterations", "converged", "volume_fraction_target", "volume_fraction_final",
            "compliance_solid_Nmm", "compliance_rationalized_Nmm", "stiffness_loss_percent",
            "max_deflection_rationalized_mm", "mass_removed_percent", "mass_removed_freeform_percent",
            "mass_removed_kg", "capture_percent", "capture_ceiling_percent", "outputs")
    out = {k: s.get(k) for k in keys}
    out["max_deflection_solid_mm"] = s["solid"]["max_deflection_mm"]
    out["voids"] = len(s["voids"])
    out["profile"] = s["rules"]["profile"]
    out["violations"] = len(s["rules"]["violations"])
    return out


# --- lacuna batch ----------------------------------------------------------------------------------------------


@dataclass
class JobsResult:
    """What a run of many jobs did: one row per job, the summary, the files written."""

    rows: list[dict]
    summary: dict
    paths: list[Path] = field(default_factory=list)

    @property
    def exit_code(self) -> int:
        """0 when every job is done within its rules, else 1 (a job refused, failed or violating a rule)."""
        return 0 if all(r["status"] == DONE for r in self.rows) else 1


@dataclass
class BatchResult(JobsResult):
    """What :func:`batch_files` did: one row per drawing (in the order given), the summary, files written."""

    def text_lines(self) -> list[str]:
        lines = [f"{len(self.rows)} panels: " + ", ".join(
            f"{sum(r['status'] == s for r in self.rows)} {s}" for s in STATUS_EXIT if any(r["status"] == s
                                                                                         for r in self.rows))]
        lines += ["  " + line for line in _markdown_table(self.rows).splitlines()]
        lines += [f"  wrote {p}" for p in self.summary["outputs"]]
        lines.append(f"  caution: {CAUTION}")
        return lines


def job_beside(drawing: Path) -> Path | None:
    """The per-drawing job file: ``<stem>.toml`` beside the drawing, when there is one."""
    candidate = drawing.with_suffix(".toml")
    return candidate if candidate.is_file() else None


def _folders(drawings: list[Path]) -> list[str]:
    """A result folder name per drawing: its stem, numbered where two drawings share one."""
    names: list[str] = []
    seen: dict[str, int] = {}
    for d in drawings:
        stem = d.stem or "panel"
        seen[stem.lower()] = seen.get(stem.lower(), 0) + 1
        names.append(stem if seen[stem.lower()] == 1 else f"{stem}-{seen[stem.lower()]}")
    return names


def _unreadable(drawing: Path) -> str | None:
    """Why a drawing cannot even be handed to a worker (absent, a folder, no permission), or None."""
    if not drawing.exists():
        return f"{drawing}: the drawing does not exist. Check the path and the spelling."
    if not drawing.is_file():
        return f"{drawing}: this is a folder, not a drawing. Give the DXF files themselves."
    if not os.access(drawing, os.R_OK):
        return f"{drawing}: the drawing cannot be read (no permission). Check the file's permissions."
    return None


def batch_files(drawings, job_path=None, *, out_dir=None, scheduler: str | None = None, workers: int | None = None,
                force: bool = False, on_done=None) -> BatchResult:
    """``lacuna batch``: the whole job on every drawing, in parallel on Dask; one result folder per drawing in
    ``out_dir`` (default ``./lacuna-batch``) and the summary tables ``batch-summary.csv``, ``.md`` and ``.json``.

    ``job_path`` applies to every drawing; without it each drawing takes ``<stem>.toml`` beside it when there is
    one (else its own markers). A refused panel (bad drawing) is a row with its message; raises LacunaError only
    when nothing could start: no drawing given or readable, a bad ``job_path``, the output folder not writable,
    earlier results present without ``force``, no scheduler at ``scheduler``.
    ``on_done(row, done, total)`` is called as each panel finishes.
    """
    from .jobfile import read_job
    from .write.files import plan_outputs, write_outputs

    drawings = [Path(d) for d in drawings]
    if not drawings:
        raise LacunaError("no drawings were given.", where="lacuna batch",
                          hint="Name one or more DXF files, e.g. lacuna batch lintels/*.dxf --job lintel.toml.")
    out = Path(out_dir) if out_dir is not None else Path("lacuna-batch")
    if job_path is not None:
        # A bad job for all of them (its keys, or its rules: an unknown profile) stops the batch before it starts,
        # with its own paragraph.
        from .pipeline import job_rules

        job_rules(read_job(job_path))
    jobs = [Path(job_path) if job_path is not None else job_beside(d) for d in drawings]
    inputs = drawings + [j for j in jobs if j is not None]
    names = [f"{SUMMARY_STEM}.csv", f"{SUMMARY_STEM}.md", f"{SUMMARY_STEM}.json"]
    plan_outputs(out, names, inputs=inputs, force=force)
    folders = [out / name for name in _folders(drawings)]
    for folder in folders:
        if folder.is_dir() and any(folder.iterdir()) and not force:
            raise LacunaError(f"the result folder {folder} already holds files.",
                              hint="Choose another --out folder, or pass --force to replace them.")
    blocked = [_unreadable(d) for d in drawings]
    if all(blocked):
        raise LacunaError("no drawing could be read: " + " ".join(blocked), where="lacuna batch")

    rows: list[dict | None] = [None] * len(drawings)
    tasks, slots = [], []
    for i, (d, j, folder) in enumerate(zip(drawings, jobs, folders)):
        if blocked[i]:
            rows[i] = {"drawing": str(d), "job": str(j or ""), "folder": str(folder), "status": REFUSED,
                       "message": one_paragraph(blocked[i])}
            if on_done is not None:
                on_done(rows[i], sum(r is not None for r in rows), len(drawings))
            continue
        # Absolute paths: a worker's working folder need not be ours (and on a remote cluster is not).
        tasks.append({"drawing": str(d.resolve()), "job": str(j.resolve()) if j else None,
                      "out_dir": str(folder.resolve()), "force": force})
        slots.append(i)
    skipped = len(drawings) - len(tasks)

    def given(k: int, row: dict) -> dict:
        i = slots[k]
        return _as_given(row, tasks[k], drawings[i], jobs[i], folders[i])

    def progress(k, row, done, total):
        if on_done is not None:
            on_done(given(k, row), done + skipped, total + skipped)

    with dask_client(scheduler, workers) as client:
        for k, row in enumerate(run_tasks(client, optimize_task, tasks, on_done=progress)):
            rows[slots[k]] = given(k, row)
    rows = [_flat(r) for r in rows]  # type: ignore[arg-type]
    summary = batch_summary(rows)
    targets = plan_outputs(out, names, inputs=inputs, force=force)
    summary["outputs"] = [str(t) for t in targets]
    files = {names[0]: batch_csv(rows), names[1]: batch_markdown(rows),
             names[2]: json.dumps(summary, indent=2, allow_nan=False) + "\n"}
    paths = write_outputs(out, files, inputs=inputs, force=force)
    return BatchResult(rows=rows, summary=summary, paths=paths)


def _as_given(row: dict, task: dict, drawing: Path, job: Path | None, folder: Path) -> dict:
    """The row naming the drawing, job and folder as the caller spelled them, in its message too: the paragraph is
    then the one `lacuna optimize` prints for the same arguments."""
    message = row.get("message", "")
    for sent, given in ((task["drawing"], drawing), (task["job"], job), (task["out_dir"], folder)):
        if sent and given is not None:
            message = message.replace(sent, str(given))
    return {**row, "drawing": str(drawing), "job": str(job or ""), "folder": str(folder), "message": message}


def _flat(row: dict) -> dict:
    """A summary row: the task's keys, status and message, and the figures (None where the panel has none)."""
    figures = row.get("summary") or {}
    violations = figures.get("violations")
    return {
        "panel": Path(row["folder"]).name,
        "name": figures.get("panel") or "",
        "drawing": row["drawing"],
        "job": row.get("job") or "",
        "status": row["status"],
        "exit_code": STATUS_EXIT[row["status"]],
        "mass_removed_percent": figures.get("mass_removed_percent"),
        "mass_removed_kg": figures.get("mass_removed_kg"),
        "stiffness_loss_percent": figures.get("stiffness_loss_percent"),
        "capture_percent": figures.get("capture_percent"),
        "capture_ceiling_percent": figures.get("capture_ceiling_percent"),
        "compliance_solid_Nmm": figures.get("compliance_solid_Nmm"),
        "compliance_rationalized_Nmm": figures.get("compliance_rationalized_Nmm"),
        "max_deflection_rationalized_mm": figures.get("max_deflection_rationalized_mm"),
        "voids": figures.get("voids"),
        "profile": figures.get("profile"),
        "violations": violations,
        "rules": "" if violations is None else ("kept" if violations == 0 else f"{violations} violated"),
        "message": row.get("message", ""),
        "folder": row["folder"],
        "seconds": row.get("seconds"),                # wall time of the panel's job in its worker
        "import_seconds": row.get("import_seconds"),  # a worker's first task imports lacuna first
        "cpu_seconds": row.get("cpu_seconds"),
    }


def batch_summary(rows: list[dict]) -> dict:
    """The JSON of ``lacuna batch``: counts per status and the rows."""
    return {
        "command": "batch",
        "lacuna_version": __version__,
        "panels": len(rows),
        "counts": {s: sum(r["status"] == s for r in rows) for s in STATUS_EXIT},
        "rows": rows,
        "stiffness_loss_basis": "rise of the compliance of the panel to make against the solid panel, same loads",
        "capture_basis": "share of the optimiser's freeform saving kept by the voids to make",
        "caution": CAUTION,
        "outputs": [],
    }


CSV_COLUMNS = ("panel", "name", "drawing", "job", "status", "exit_code", "mass_removed_percent", "mass_removed_kg",
               "stiffness_loss_percent", "capture_percent", "capture_ceiling_percent", "compliance_solid_Nmm",
               "compliance_rationalized_Nmm", "max_deflection_rationalized_mm", "voids", "profile", "violations",
               "rules", "message", "folder", "seconds")


def _cell(value, digits: int = 4) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:.{digits}g}"
    return str(value)


def batch_csv(rows: list[dict]) -> str:
    """The summary as CSV: one row per panel, empty cells where a refused panel has no figure."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(CSV_COLUMNS)
    for r in rows:
        w.writerow([_cell(r[c], 6) for c in CSV_COLUMNS])
    return buf.getvalue()


def _md(text: str) -> str:
    return text.replace("|", "\\|")


def _markdown_table(rows: list[dict]) -> str:
    head = ["panel", "status", "material removed, %", "stiffness lost, %", "kept of the saving, %", "voids", "rules"]
    lines = ["| " + " | ".join(head) + " |", "|" + "---|" * len(head)]
    for r in rows:
        pct = lambda v: "" if v is None else f"{v:.1f}"  # noqa: E731
        rules = f"{r['profile']}: {r['rules']}" if r["rules"] else ""
        lines.append("| " + " | ".join(_md(c) for c in (
            r["panel"], r["status"], pct(r["mass_removed_percent"]), pct(r["stiffness_loss_percent"]),
            pct(r["capture_percent"]), _cell(r["voids"]), rules)) + " |")
    return "\n".join(lines)


def batch_markdown(rows: list[dict]) -> str:
    """The summary as Markdown: the table, then each refused or failed panel's message, then the caution."""
    out = ["# Batch summary", "", f"{len(rows)} panels; lacuna {__version__}.", "",
           "Stiffness lost: rise of the compliance of the panel to make against the solid panel under the same "
           "loads. Kept of the saving: the share of the optimiser's freeform saving that the voids to make keep.",
           "", _markdown_table(rows), ""]
    troubled = [r for r in rows if r["message"]]
    if troubled:
        out += ["## Panels not done", ""]
        out += [f"- **{_md(r['panel'])}** ({r['status']}): {r['message']}" for r in troubled]
        out.append("")
    out += ["Each panel's drawing copy, figures, schedule and report are in its own folder.", "",
            f"**Caution.** {CAUTION}", ""]
    return "\n".join(out)
