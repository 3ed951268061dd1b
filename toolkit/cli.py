"""The `lacuna` command: parse, call the API, print. Nothing else."""

from __future__ import annotations

import json
import logging
import os
import sys
import traceback
from pathlib import Path

import click

# Only click and the light top of the package load here, so `lacuna --help` answers at once; each command imports
# the API (numpy, scipy, ezdxf, shapely behind it) when it runs. tests/test_startup.py holds this.
from .about import CAUTION, __version__
from .errors import LacunaError, naming, one_paragraph

EXIT_BAD_INPUT = 2
EXIT_INTERNAL = 3


class _Lacuna(click.Group):
    """Turns a LacunaError into one clear paragraph on stderr and exit code 2 (a traceback only with --debug)."""

    def invoke(self, ctx):
        debug = bool(ctx.params.get("debug"))
        try:
            return super().invoke(ctx)
        except LacunaError as error:
            if debug:
                traceback.print_exc()
            click.echo(f"lacuna: {one_paragraph(str(error))}", err=True)
            ctx.exit(EXIT_BAD_INPUT)
        except (click.exceptions.Exit, click.ClickException, click.Abort, KeyboardInterrupt):
            raise
        except BrokenPipeError:
            # The reader of our output went away (e.g. `| head`): the files are written; stop quietly.
            sys.stdout = open(os.devnull, "w")
            ctx.exit(0)
        except Exception as error:  # a defect in lacuna itself: say so plainly, keep the traceback for --debug
            if debug:
                traceback.print_exc()
            click.echo(
                f"lacuna: internal error ({type(error).__name__}: {one_paragraph(str(error))}). This is a fault in "
                "lacuna, not in your input; run again with --debug and report the traceback.",
                err=True,
            )
            ctx.exit(EXIT_INTERNAL)


def _emit(summary: dict, as_json: bool, lines: list[str]) -> None:
    if as_json:
        click.echo(json.dumps(summary, indent=2, allow_nan=False))
    else:
        for line in lines:
            click.echo(one_paragraph(line))  # warnings quote the drawing, damaged bytes and all


_out_option = click.option(
    "--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=None,
    help="Output folder (default: a folder beside the drawing named <stem>-lacuna).",
)
_job_option = click.option(
    "--job", "job_path", type=click.Path(dir_okay=False, path_type=Path), default=None,
    help="Job file (TOML) with material, supports, loads and rules; optional where the drawing carries markers.",
)
_json_option = click.option("--json", "as_json", is_flag=True, help="Print exactly one JSON object on stdout.")
_force_option = click.option("--force", is_flag=True, help="Replace output files that already exist.")


@click.group(cls=_Lacuna, help=f"""lacuna: lighten structural panels drawn in DXF.

Reads a panel's outline and openings from a drawing, analyses it with plane-stress finite elements, finds
where material does no work (BESO) and turns that into voids a shop can make.

\b
CAUTION: {CAUTION}
""", epilog="Exit codes: 0 done; 1 check found violations (batch, sweep: a panel or point refused, failed or violated "
          "a rule); 2 bad input or impossible request.")
@click.version_option(__version__, prog_name="lacuna")
@click.option("--debug", is_flag=True, help="Show a traceback with any error.")
def main(debug: bool) -> None:
    ezdxf_log = logging.getLogger("ezdxf")
    if not debug and not any(isinstance(h, logging.NullHandler) for h in ezdxf_log.handlers):
        # ezdxf logs what it repairs in a damaged file straight to stderr; lacuna reports the repairs in its
        # own warnings, so a refusal stays the one paragraph the exit code promises.
        ezdxf_log.addHandler(logging.NullHandler())


@main.command(help=f"""Analyse a panel: stresses, deflection, reactions; writes a JSON summary and an SVG figure.

\b
{CAUTION}""")
@click.argument("panel", type=click.Path(dir_okay=False, path_type=Path))
@_job_option
@_out_option
@_json_option
@_force_option
def analyze(panel: Path, job_path: Path | None, out_dir: Path | None, as_json: bool, force: bool) -> None:
    from . import api

    with naming(panel, job_path):
        outcome = api.analyze_file(panel, job_path, out_dir=out_dir, force=force)
    _emit(outcome.summary, as_json, outcome.text_lines())


class _Progress:
    """One line on stderr, rewritten each iteration where stderr is a terminal, every tenth otherwise, with an
    estimate of the time left: the iterations still to go to the volume target at the evolution rate, plus the
    convergence window, times the mean time of the iterations so far (an estimate: the optimiser may converge
    sooner or need more)."""

    def __init__(self, limit: int, target: float | None = None, rate: float = 0.02, window: int = 5):
        self.limit = limit
        self.target, self.rate, self.window = target, rate, window
        self.tty = sys.stderr.isatty()
        self.started: float | None = None
        self.open = False  # a terminal line is being rewritten and wants its newline

    def left(self, iteration: int, volume: float) -> str:
        import math
        import time

        now = time.perf_counter()
        if self.started is None:
            self.started = now
            return ""
        per = (now - self.started) / max(iteration - 1, 1)
        to_target = 0
        if self.target is not None and volume > self.target * (1 + 1e-3) and 0 < self.rate < 1:
            to_target = math.ceil(math.log(self.target / volume) / math.log(1.0 - self.rate))
        remaining = min(self.limit - iteration, to_target + 2 * self.window)
        seconds = max(remaining, 0) * per
        if seconds >= 120:
            return f"  about {seconds / 60:.0f} min left"
        return f"  about {seconds:.0f} s left" if seconds >= 1.0 else "  under 1 s left"

    def __call__(self, index: int, compliance: float, volume: float) -> None:
        iteration = index + 1  # the optimiser counts from 0; people and the figures from 1
        width = 24
        done = min(width, int(width * iteration / max(self.limit, 1)))
        line = (f"BESO [{'#' * done}{'.' * (width - done)}] iteration {iteration:4d}  "
                f"compliance {compliance:10.4g} N mm  kept {100 * volume:5.1f} %{self.left(iteration, volume)}")
        if self.tty:
            click.echo("\r" + line + "   ", nl=False, err=True)
            self.open = True
        elif iteration % 10 == 0 or iteration == 1:
            click.echo(line, err=True)

    def stage(self, words: str) -> None:
        """A later stage starts: one line of its own ("... fitting 6-gons to 18 freeform voids ...")."""
        self.close()
        click.echo(f"... {words}", err=True)

    def close(self) -> None:
        if self.open:
            click.echo("", err=True)
            self.open = False


@main.command(help=f"""Find where the panel's material does no work and turn it into voids a shop can make.

Runs BESO inside the fixed envelope, fits the voids to the chosen family under the fabrication rules,
re-analyses what will be made, and writes a copy of the drawing with the LACUNA-* layers, an SVG of the
result, the convergence plot, the void schedule (CSV) and the JSON summary.

\b
{CAUTION}""")
@click.argument("panel", type=click.Path(dir_okay=False, path_type=Path))
@_job_option
@_out_option
@_json_option
@_force_option
@click.option("--frames", type=click.IntRange(min=0), default=0, show_default=True,
              help="Also write an SVG of the evolving layout every K iterations (0: none).")
@click.option("--dxf-version", default=None, help="Write the drawing as this DXF version (default: as the input).")
@click.option("--replace", is_flag=True,
              help="The drawing already holds results of an earlier run: replace them in the copy.")
def optimize(panel: Path, job_path: Path | None, out_dir: Path | None, as_json: bool, force: bool, frames: int,
             dxf_version: str | None, replace: bool) -> None:
    from . import api

    plan = api.optimize_plan(job_path)
    progress = _Progress(plan.max_iterations, plan.volume_fraction, plan.evolution_rate, plan.convergence_window)
    try:
        with naming(panel, job_path):
            outcome = api.optimize_file(panel, job_path, out_dir=out_dir, force=force, frames=frames,
                                        on_iteration=progress, dxf_version=dxf_version, replace=replace,
                                        on_stage=progress.stage, helper=True)
    finally:
        progress.close()
    _emit(outcome.summary, as_json, outcome.text_lines())


@main.command(help=f"""Check voids drawn by hand against the fabrication rules (web, edge cover, size, stock bits,
bearing clearance, KEEP zones).

Reads the voids on the LACUNA-VOID-* layers (and any layers named with --layers), prints each violation with its
location and entity handles, and writes a copy of the drawing with a marker on LACUNA-CHECK at each one.
Exit code 1 when anything is violated; 0 when all rules hold or there is nothing to check.

\b
{CAUTION}""")
@click.argument("drawing", type=click.Path(dir_okay=False, path_type=Path))
@_job_option
@click.option("--profile", default=None, help="Fabrication profile to check against (overrides the job's).")
@click.option("--layers", default=None, help="More layers holding voids, comma-separated.")
@_out_option
@_json_option
@_force_option
@click.option("--replace", is_flag=True, help="Replace the markers of an earlier check in the drawing copy.")
@click.pass_context
def check(ctx, drawing: Path, job_path: Path | None, profile: str | None, layers: str | None, out_dir: Path | None,
          as_json: bool, force: bool, replace: bool) -> None:
    from . import api

    with naming(drawing, job_path):
        result = api.check_file(drawing, job_path, profile=profile, layers=layers, out_dir=out_dir, force=force,
                                replace=replace)
    _emit(result.summary, as_json, result.text_lines())
    ctx.exit(result.exit_code)


_scheduler_option = click.option(
    "--scheduler", default=None, metavar="ADDRESS",
    help="Address of a running Dask scheduler (e.g. tcp://10.0.0.5:8786) whose workers see the same files; "
         "default: a local cluster, one worker per core.",
)
_workers_option = click.option("--workers", type=click.IntRange(min=1), default=None,
                               help="Workers of the local cluster (default: one per core).")


def _panel_done(row: dict, done: int, total: int) -> None:
    """One line on stderr per finished panel or sweep point."""
    name = row.get("panel") or Path(row.get("folder") or row.get("drawing", "")).name
    figures = row.get("summary") or {}
    if figures:
        text = (f"{figures['mass_removed_percent']:.1f} % removed, compliance "
                f"{figures['stiffness_loss_percent']:+.1f} % against solid, rules "
                f"{'kept' if not figures['violations'] else str(figures['violations']) + ' violated'}")
    else:
        text = row.get("message", "")
    click.echo(one_paragraph(f"[{done}/{total}] {name}: {row['status']}: {text}"), err=True)


@main.command(help=f"""Run the whole optimize job on many drawings at once, in parallel on Dask.

Each drawing gets its own result folder in --out (the files `lacuna optimize` writes) and one summary table
(batch-summary.csv, .md, .json) lists material removed, stiffness lost (compliance rise against the solid
panel), kept of the saving and rule status per panel. The job file (--job) applies to every drawing; without
it each drawing takes <stem>.toml beside it when there is one. A refused panel is reported with its message
and the others go on. Exit codes: 0 all done within the rules; 1 a panel refused, failed or violated a rule;
2 nothing could start.

\b
{CAUTION}""")
@click.argument("drawings", nargs=-1, required=True, type=click.Path(path_type=Path))
@_job_option
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=Path("lacuna-batch"),
              show_default=True, help="Output folder: one folder per drawing and the summary tables.")
@_scheduler_option
@_workers_option
@_json_option
@_force_option
@click.pass_context
def batch(ctx, drawings: tuple[Path, ...], job_path: Path | None, out_dir: Path, scheduler: str | None,
          workers: int | None, as_json: bool, force: bool) -> None:
    from .batch import batch_files

    result = batch_files(list(drawings), job_path, out_dir=out_dir, scheduler=scheduler, workers=workers,
                         force=force, on_done=_panel_done)
    _emit(result.summary, as_json, result.text_lines())
    ctx.exit(result.exit_code)


@main.command(help=f"""The trade-off curve of one panel: made mass against compliance and largest deflection over
volume fractions (and fabrication profiles), each point a whole optimize job, in parallel on Dask.

--volume START:STOP:COUNT gives COUNT volume fractions (the share of the design region kept solid) from START to
STOP, e.g. 0.9:0.4:6. --profile A,B draws one line per profile (default: the job's rules). Writes each point's
files in its own folder and <stem>-sweep.csv, <stem>-sweep.svg (the plot, knee marked) and <stem>-sweep.json
in --out (default: <stem>-sweep beside the drawing). Exit codes: 0 every point done within the rules; 1 a point
refused, failed or violated a rule; 2 bad input (nothing written).

\b
{CAUTION}""")
@click.argument("drawing", type=click.Path(dir_okay=False, path_type=Path))
@_job_option
@click.option("--volume", "volumes", required=True, metavar="START:STOP:COUNT",
              help="Volume fractions to sweep, e.g. 0.9:0.4:6.")
@click.option("--profile", "profiles", default=None, metavar="A,B",
              help="Fabrication profiles, comma-separated: one curve each (default: the job's).")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=None,
              help="Output folder (default: a folder beside the drawing named <stem>-sweep).")
@_scheduler_option
@_workers_option
@_json_option
@_force_option
@click.pass_context
def sweep(ctx, drawing: Path, job_path: Path | None, volumes: str, profiles: str | None, out_dir: Path | None,
          scheduler: str | None, workers: int | None, as_json: bool, force: bool) -> None:
    from .sweep import sweep_file

    result = sweep_file(drawing, job_path, volumes=volumes, profiles=profiles, out_dir=out_dir, scheduler=scheduler,
                        workers=workers, force=force, on_done=_panel_done)
    _emit(result.summary, as_json, result.text_lines())
    ctx.exit(result.exit_code)


@main.command(help="List the fabrication profiles and their rules, each value with its source.")
@_json_option
def profiles(as_json: bool) -> None:
    from .rules.profiles import profiles_table, profiles_text

    table = profiles_table()
    if as_json:
        click.echo(json.dumps(table, indent=2))
    else:
        click.echo(profiles_text(table))


@main.command(help="""Convert a drawing: DXF -> SVG (any entities), SVG -> DXF (closed paths), or DXF -> DXF in other units.

\b
Examples:
  lacuna convert panel.dxf panel.svg --layers PANEL,OPENING
  lacuna convert sketch.svg sketch.dxf --units mm
  lacuna convert panel-in-inches.dxf panel-mm.dxf --units mm""")
@click.argument("source", type=click.Path(dir_okay=False, path_type=Path))
@click.argument("target", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--layers", default=None, help="Comma-separated layer names to keep (default: all).")
@click.option("--units", type=click.Choice(["mm", "cm", "m", "in", "ft"]), default=None,
              help="Unit of the output drawing.")
@_force_option
def convert(source: Path, target: Path, layers: str | None, units: str | None, force: bool) -> None:
    from . import api

    for line in api.convert_file(source, target, layers=layers, units=units, force=force):
        click.echo(one_paragraph(line))


@main.command(help=f"""Run the whole job on the bundled demo panel (a glulam loft lintel over a barn door): the
solid panel's stress figure, the optimisation, the voids to make, the drawing copy, schedule and report.

\b
{CAUTION}""")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=Path("lacuna-demo"),
              show_default=True, help="Output folder.")
@_json_option
@_force_option
def demo(out_dir: Path, as_json: bool, force: bool) -> None:
    from . import api

    plan = api.optimize_plan(api.demo_files()[1])
    progress = _Progress(plan.max_iterations, plan.volume_fraction, plan.evolution_rate, plan.convergence_window)
    try:
        outcome = api.run_demo(out_dir, force=force, on_iteration=progress, on_stage=progress.stage, helper=True)
    finally:
        progress.close()
    _emit(outcome.summary, as_json, outcome.text_lines())


@main.command(help="Write a commented job-file template and a sample drawing into DIR (default: this folder).")
@click.argument("directory", required=False, type=click.Path(file_okay=False, path_type=Path), default=Path("."))
@_force_option
def init(directory: Path, force: bool) -> None:
    from . import api

    for path in api.write_starter(directory, force=force):
        click.echo(f"wrote {path}")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
