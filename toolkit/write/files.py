"""Writing results whole or not at all: every file goes to a temporary name beside its target and is renamed.

A command first computes everything it will write, then hands the lot to :func:`write_outputs`. Nothing is
written until every check has passed, so a bad input never leaves a half-made folder behind.
"""

from __future__ import annotations

import os
import secrets
from pathlib import Path

from ..errors import LacunaError


def default_out_dir(input_path: str | os.PathLike) -> Path:
    """The folder beside the input named ``<stem>-lacuna`` (CONTRACT.md); for a drawing lacuna wrote (its name
    ends in ``-lacuna``, e.g. a result copy checked again) the folder it is in, rather than a doubled
    ``-lacuna-lacuna`` folder inside a results folder."""
    p = Path(input_path)
    if p.stem.endswith("-lacuna"):
        return p.parent
    return p.with_name(f"{p.stem}-lacuna")


def plan_outputs(out_dir: Path, names: list[str], *, inputs: list[Path], force: bool) -> list[Path]:
    """Check that the named files may be written into ``out_dir``; return their paths. Writes nothing."""
    targets = [out_dir / name for name in names]
    resolved_inputs = {Path(p).resolve() for p in inputs}
    for target in targets:
        if target.resolve() in resolved_inputs:
            raise LacunaError(
                f"the output {target} would overwrite an input.",
                hint="Choose another --out folder; lacuna never modifies the files it is given.",
            )
        if target.exists() and not force:
            raise LacunaError(
                f"{target} already exists.", hint="Choose another --out folder, or pass --force to replace it."
            )
    if out_dir.exists() and not out_dir.is_dir():
        raise LacunaError(f"the output folder {out_dir} is a file.", hint="Choose another --out folder.")
    existing = out_dir
    while not existing.exists():
        existing = existing.parent
    if not os.access(existing, os.W_OK | os.X_OK):
        raise LacunaError(
            f"the output folder {out_dir} cannot be written (no permission on {existing}).",
            hint="Choose a writable --out folder.",
        )
    return targets


def write_atomic(path: Path, data: bytes | str) -> None:
    """Write ``data`` to ``path`` through a temporary file in the same folder and an atomic rename."""
    # A damaged drawing's undecodable bytes reach messages as lone surrogates, which UTF-8 cannot hold: they are
    # written as escapes (\udc8c) rather than lose the whole file.
    payload = data.encode("utf-8", errors="backslashreplace") if isinstance(data, str) else data
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = None
    try:
        # The temporary's name is known before the file exists, so a Ctrl-C at any moment after its creation
        # finds it to remove (tempfile.mkstemp creates the file before it returns the name: a Ctrl-C in between
        # left the file behind). O_EXCL makes the creation fail rather than reuse a name.
        for _ in range(100):
            tmp = path.parent / f".{path.name}.{secrets.token_hex(4)}.part"
            try:
                fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)  # the umask applies, as for any file
                break
            except FileExistsError:
                tmp = None
        else:
            raise LacunaError(f"no temporary name is free beside {path}.", hint="Clear the folder's .part files.")
        with os.fdopen(fd, "wb") as f:
            f.write(payload)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
    except BaseException:
        # Ctrl-C or a full disk: the target keeps its old content (or stays absent), the temporary goes.
        if tmp is not None:
            try:
                os.unlink(tmp)
            except FileNotFoundError:
                pass
        raise


def write_outputs(out_dir: Path, files: dict[str, bytes | str], *, inputs: list[Path], force: bool) -> list[Path]:
    """Write every file of ``files`` (name -> content) into ``out_dir``; return the paths written."""
    targets = plan_outputs(out_dir, list(files), inputs=inputs, force=force)
    for target, content in zip(targets, files.values()):
        write_atomic(target, content)
    return targets
