"""Opening a drawing file, its length unit, and walking its model space with block references resolved."""

from __future__ import annotations

import gc
import os
import re
import struct
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Iterable, Iterator

import ezdxf
from ezdxf import recover
from ezdxf.document import Drawing as DxfDocument
from ezdxf.lldxf import validator
from ezdxf.lldxf.const import DXFError, DXFStructureError

from ..errors import LacunaError
from ..units import INSUNITS_TO_UNIT, UNIT_TO_INSUNITS

# What ezdxf's readers raise on damaged bytes besides their own DXFError: a tag stream that ends early
# (StopIteration, IndexError), a truncated binary record (struct.error), a value of the wrong kind
# (ValueError; TypeError, e.g. a header whose $ACADVER lost its value), an unknown binary group code
# (KeyError), an object left half-built (AttributeError: a LAYOUT without its attributes), text that is not in
# the file's encoding (UnicodeDecodeError). Only ezdxf's code runs inside these calls. Found by fuzzing
# (tests/test_fuzz.py).
DAMAGED_FILE_ERRORS = (DXFError, UnicodeDecodeError, ValueError, TypeError, IndexError, KeyError, AttributeError,
                       StopIteration, struct.error)

# The warning that says a file was read by ezdxf's recover module (the reader's errors look for it).
RECOVERED = "the file was damaged and has been read in recovery mode"

# Block references nested deeper than this are almost surely a reference cycle in a damaged file.
MAX_BLOCK_DEPTH = 32


@dataclass(frozen=True)
class Item:
    """One graphic entity of the model space, block contents already placed in drawing coordinates.

    ``handle`` is the entity's own handle, or for block contents the path of handles from the model-space
    INSERT down to the entity in the block definition, joined by "/" (e.g. "2F/1A").
    ``layer`` is the effective layer: contents of a block drawn on layer "0" take the INSERT's layer.
    """

    entity: object
    layer: str
    handle: str

    @property
    def kind(self) -> str:
        return self.entity.dxftype()


@contextmanager
def _bulk_load():
    """The cyclic garbage collector paused while a document is parsed.

    Parsing allocates hundreds of thousands of objects that all stay alive; every automatic collection would
    walk the growing heap again for nothing (a fifth of the parse time of a 200,000-entity drawing:
    docs/robustness-limits.md). Reference counting still frees everything as usual.
    """
    was_enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was_enabled:
            gc.enable()


def open_document(path: str) -> tuple[DxfDocument, list[str]]:
    """Read a DXF file (ASCII or binary, any version ezdxf reads) without ever writing to it.

    A file that does not load cleanly is read again through ezdxf's recover module; what its audit fixed or
    could not fix comes back as warnings.
    """
    where = str(path)
    if not os.path.isfile(path):
        raise LacunaError("no such file.", where=where, hint="Check the path and the file name.")
    if validator.is_dwg_file(path):
        raise LacunaError(
            "the file is a DWG, not a DXF drawing.", where=where, hint="Save or export the drawing as DXF."
        )
    looks_like_dxf = validator.is_binary_dxf_file(path) or validator.is_dxf_file(path)
    if not looks_like_dxf and not _has_dxf_sections(path):
        raise LacunaError(
            "the file is not a DXF drawing: it holds no DXF sections.",
            where=where,
            hint="Export the drawing from the drafting program as DXF (ASCII or binary) and read that file.",
        )
    if looks_like_dxf:
        try:
            with _bulk_load():
                doc = ezdxf.readfile(path)
        except DAMAGED_FILE_ERRORS:
            pass  # damaged: the recover reader below says what it had to repair
        else:
            return _units_as_written(doc, path), []
    try:
        with _bulk_load():
            doc, auditor = recover.readfile(path)
    except (*DAMAGED_FILE_ERRORS, OSError) as error:
        why = str(error).strip().rstrip(".") or type(error).__name__
        raise LacunaError(
            f"the file is not a DXF drawing, or is too damaged to read ({why}).",
            where=where,
            hint="Open it in the drafting program it came from and save it again as DXF.",
        ) from None
    warnings = [f"{where}: {RECOVERED}."]
    warnings += _audit_lines(auditor.fixes, f"{where}: repaired")
    warnings += _audit_lines(auditor.errors, f"{where}: damage left as found")
    return _units_as_written(doc, path), warnings


def _units_as_written(doc: DxfDocument, path: str) -> DxfDocument:
    """``doc`` without the length unit ezdxf gives a file that has no HEADER section (its new-drawing default,
    $INSUNITS = 6, metres): such a file, an R12 export of the entities alone, says nothing of its unit, and is read
    as one that is unitless (``drawing_unit``). Found 2026-12-04: a 3600 mm beam written that way was read as
    3.6 km."""
    if "$INSUNITS" in doc.header and not validator.is_binary_dxf_file(path) and not _has_header_section(path):
        del doc.header["$INSUNITS"]
    return doc


def _has_header_section(path: str) -> bool:
    """Whether an ASCII DXF file holds a HEADER section (group code 2, value HEADER) in its first megabyte, where
    the first section starts."""
    with open(path, "rb") as fp:
        head = fp.read(1 << 20)
    return re.search(rb"(?m)^[ \t]*2[ \t]*\r?\n[ \t]*HEADER[ \t]*\r?$", head) is not None


def _audit_lines(entries, lead: str) -> list[str]:
    """One line per kind of audit entry: a file cut in its header gives hundreds of the same repair."""
    by_code: dict[int, list[str]] = {}
    for entry in entries:
        by_code.setdefault(entry.code, []).append(entry.message)
    return [f"{lead}: {messages[0]}" + (f" (and {len(messages) - 1} more like it)" if len(messages) > 1 else "")
            for messages in by_code.values()]


def _has_dxf_sections(path: str) -> bool:
    """Whether the file holds a DXF section start (group code 0, value SECTION) in its first megabyte.

    ezdxf's recover reader turns almost any bytes into an empty document, so a file with a damaged start
    is only handed to it when it still shows the structure of a DXF file.
    """
    with open(path, "rb") as fp:
        head = fp.read(1 << 20)
    return re.search(rb"(?m)^[ \t]*0[ \t]*\r?\n[ \t]*SECTION[ \t]*\r?$", head) is not None


def drawing_unit(doc: DxfDocument, where: str) -> tuple[str, list[str]]:
    """The drawing's length unit from $INSUNITS; unitless or missing is taken as mm with a warning."""
    code = doc.header.get("$INSUNITS", None)
    if code is None or int(code) == 0:
        said = "has no length unit ($INSUNITS is missing)" if code is None else "is unitless ($INSUNITS = 0)"
        return "mm", [
            f"{where}: the drawing {said}; its lengths are taken as millimetres. "
            f"Set $INSUNITS ({', '.join(f'{c} = {u}' for u, c in UNIT_TO_INSUNITS.items())}) to say otherwise."
        ]
    code = int(code)
    if code not in INSUNITS_TO_UNIT:
        known = ", ".join(f"{c} = {u}" for c, u in INSUNITS_TO_UNIT.items())
        raise LacunaError(
            f"the drawing's length unit is $INSUNITS = {code}, which this program does not read.",
            where=f"{where}, header $INSUNITS",
            hint=f"Set the drawing's units to one of {known} (0 = unitless is read as mm) and save again.",
        )
    return INSUNITS_TO_UNIT[code], []


def model_items(
    doc: DxfDocument,
    keep_whole_layers: Iterable[str],
    where: str,
    warnings: list[str],
    only_layers: Iterable[str] | None = None,
) -> list[Item]:
    """Every graphic entity of the model space, block references resolved (nested and arrayed ones too).

    An INSERT on one of ``keep_whole_layers`` (case-insensitive) is kept as it is: there it is a marker whose
    insertion point and attributes matter, not a container of geometry. With ``only_layers``, entities on
    other layers are passed over (block references are still opened: their contents may be on those layers).
    """
    keep = {name.casefold() for name in keep_whole_layers}
    only = None if only_layers is None else {name.casefold() for name in only_layers}
    return list(_walk(doc.modelspace(), "", "", keep, 0, where, warnings, only))


def _walk(
    entities, parent: str, parent_layer: str, keep: set[str], depth: int, where: str, warnings: list[str],
    only: set[str] | None = None,
) -> Iterator[Item]:
    for entity in entities:
        if not entity.dxf.is_supported("layer"):
            # Only a damaged file puts a record that is no graphic entity into a layout.
            warnings.append(f"{where}: a {entity.dxftype()} record {entity.dxf.get('handle', '')} in the model "
                            "space is not a drawing entity; skipped.")
            continue
        layer = entity.dxf.get("layer", "0")
        if parent_layer and layer == "0":
            layer = parent_layer  # the DXF convention for block contents on layer 0
        if only is not None and layer.casefold() not in only and entity.dxftype() != "INSERT":
            # A drawing of a whole site holds far more than the panel: no Item for what is never looked at.
            continue
        own = entity.dxf.handle
        if own is None and entity.source_of_copy is not None:
            own = entity.source_of_copy.dxf.handle
        handle = f"{parent}/{own}" if parent else str(own)
        if entity.dxftype() != "INSERT" or layer.casefold() in keep:
            yield Item(entity, layer, handle)
            continue
        if depth >= MAX_BLOCK_DEPTH:
            raise LacunaError(
                f"block references are nested more than {MAX_BLOCK_DEPTH} deep (a block that contains itself?).",
                where=f"{where}, INSERT {handle}",
                hint="Explode or redefine the block.",
            )
        name = entity.dxf.get("name")
        if not isinstance(name, str) or not name or (entity.doc is not None and name not in entity.doc.blocks):
            # A damaged file's reference to nothing draws nothing in any drafting program either: say so, go on.
            said = "names no block" if not isinstance(name, str) or not name else \
                f"names the block {name!r}, which the drawing does not define"
            warnings.append(f"{where}, layer {layer}, INSERT {handle}: the block reference {said}; skipped.")
            continue
        arrayed = list(entity.multi_insert()) if entity.mcount > 1 else [entity]
        for k, insert in enumerate(arrayed):
            label = f"{handle}[{k}]" if len(arrayed) > 1 else handle

            def skipped(e, reason, label=label):
                warnings.append(f"{where}: a {e.dxftype()} in block reference {label} was skipped ({reason}).")

            try:
                contents = list(insert.virtual_entities(skipped_entity_callback=skipped))
            except DXFStructureError as error:
                raise LacunaError(
                    f"block reference of {entity.dxf.name!r} cannot be resolved ({error}).",
                    where=f"{where}, layer {layer}, INSERT {handle}",
                    hint="Redefine the block or explode the reference.",
                ) from None
            yield from _walk(contents, label, layer, keep, depth + 1, where, warnings, only)
