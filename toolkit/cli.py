"""The `lacuna` command: parse, call the API, print. Nothing else."""

from __future__ import annotations

import json
import sys
import traceback
from pathlib import Path

import click

from . import CAUTION, __version__, api
from .errors import LacunaError

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
            click.echo(f"lacuna: {error}", err=True)
            ctx.exit(EXIT_BAD_INPUT)
        except (click.exceptions.Exit, click.ClickException, click.Abort, KeyboardInterrupt):
            raise
        except Exception as error:  # a defect in lacuna itself: say so plainly, keep the traceback for --debug
            if debug:
                traceback.print_exc()
            click.echo(
                f"lacuna: internal error ({type(error).__name__}: {error}). This is a fault in lacuna, not in your "
                "input; run again with --debug and report the traceback.",
                err=True,
            )
            ctx.exit(EXIT_INTERNAL)


def _emit(summary: dict, as_json: bool, lines: list[str]) -> None:
    if as_json:
        click.echo(json.dumps(summary, indent=2, allow_nan=False))
    else:
        for line in lines:
            click.echo(line)


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
""", epilog="Exit codes: 0 done; 1 check found violations; 2 bad input or impossible request.")
@click.version_option(__version__, prog_name="lacuna")
@click.option("--debug", is_flag=True, help="Show a traceback with any error.")
def main(debug: bool) -> None:
    pass


@main.command(help=f"""Analyse a panel: stresses, deflection, reactions; writes a JSON summary and an SVG figure.

\b
{CAUTION}""")
@click.argument("panel", type=click.Path(dir_okay=False, path_type=Path))
@_job_option
@_out_option
@_json_option
@_force_option
def analyze(panel: Path, job_path: Path | None, out_dir: Path | None, as_json: bool, force: bool) -> None:
    outcome = api.analyze_file(panel, job_path, out_dir=out_dir, force=force)
    _emit(outcome.summary, as_json, outcome.text_lines())


@main.command(help=f"""Run lacuna on the bundled demo panel (a glulam loft lintel) and write the results.

\b
{CAUTION}""")
@click.option("--out", "out_dir", type=click.Path(file_okay=False, path_type=Path), default=Path("lacuna-demo"),
              show_default=True, help="Output folder.")
@_json_option
@_force_option
def demo(out_dir: Path, as_json: bool, force: bool) -> None:
    outcome = api.run_demo(out_dir, force=force)
    _emit(outcome.summary, as_json, outcome.text_lines())


@main.command(help="Write a commented job-file template and a sample drawing into DIR (default: this folder).")
@click.argument("directory", required=False, type=click.Path(file_okay=False, path_type=Path), default=Path("."))
@_force_option
def init(directory: Path, force: bool) -> None:
    for path in api.write_starter(directory, force=force):
        click.echo(f"wrote {path}")


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
