"""A minimal DXF reader that knows nothing but group codes: a second opinion on what a written file holds.

An ASCII DXF file is a flat list of (group code, value) pairs, two lines each (DXF reference, "DXF Format" /
"ASCII DXF Files"). Code 0 starts a new record ("SECTION", an entity type, "ENDSEC", ...), code 2 right after
"SECTION" names the section, code 5 is a handle (105 in DIMSTYLE records), 8 a layer, 67 = 1 marks paper space,
and inside the BLOCKS section each BLOCK ... ENDBLK pair encloses one block definition. That is all this
reader uses; it shares no code with ezdxf, so a disagreement between the two points at a bad file.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

# Records that are parts of the record before them (a POLYLINE's vertices, an INSERT's attributes); they are
# not entities of a layout on their own.
SUB_RECORDS = frozenset({"VERTEX", "SEQEND", "ATTRIB"})


@dataclass
class Record:
    kind: str
    tags: list[tuple[int, str]] = field(default_factory=list)

    def first(self, code: int, default: str | None = None) -> str | None:
        for c, v in self.tags:
            if c == code:
                return v
        return default

    @property
    def handle(self) -> str | None:
        return self.first(105 if self.kind == "DIMSTYLE" else 5)

    @property
    def layer(self) -> str:
        return self.first(8, "0")


@dataclass
class GroupCodeFile:
    sections: dict[str, list[Record]]
    blocks: dict[str, list[Record]]  # block name -> entity records between BLOCK and ENDBLK
    header: dict[str, list[tuple[int, str]]]

    def entities(self) -> list[Record]:
        return [r for r in self.sections.get("ENTITIES", []) if r.kind not in SUB_RECORDS]

    def count_per_layer(self, space: str = "model") -> Counter:
        """Entities per layer in the ENTITIES section: ``space`` "model" (no 67 = 1) or "paper"."""
        want = "1" if space == "paper" else None
        return Counter(r.layer for r in self.entities() if (r.first(67) == "1") == (want == "1"))

    def handles(self) -> set[str]:
        found = set()
        for records in self.sections.values():
            found |= {r.handle for r in records if r.handle}
        return found


def pairs(data: bytes) -> list[tuple[int, str]]:
    """(code, value) pairs of an ASCII DXF file."""
    text = data.decode("utf-8", errors="replace") if data[:22] != b"AutoCAD Binary DXF\r\n\x1a\x00" else None
    if text is None:
        raise ValueError("binary DXF is not read here")
    lines = text.splitlines()
    if len(lines) % 2:
        lines = lines[:-1]  # a trailing newline-less EOF is harmless
    return [(int(lines[i].strip()), lines[i + 1].strip()) for i in range(0, len(lines), 2)]


def read(data: bytes) -> GroupCodeFile:
    """Split a DXF file into sections of records, and the BLOCKS section into blocks."""
    sections: dict[str, list[Record]] = {}
    header: dict[str, list[tuple[int, str]]] = {}
    current: list[Record] | None = None
    name = None
    it = iter(pairs(data))
    var = None
    for code, value in it:
        if code == 0 and value == "SECTION":
            code2, name = next(it)
            assert code2 == 2, "a SECTION record is followed by its name (group code 2)"
            current = sections.setdefault(name, [])
            continue
        if code == 0 and value in ("ENDSEC", "EOF"):
            current, name = None, None
            continue
        if current is None:
            continue
        if name == "HEADER":
            if code == 9:
                var = value
                header[var] = []
            elif var is not None:
                header[var].append((code, value))
            continue
        if code == 0:
            current.append(Record(value))
        elif current:
            current[-1].tags.append((code, value))
    blocks: dict[str, list[Record]] = {}
    block = None
    for record in sections.get("BLOCKS", []):
        if record.kind == "BLOCK":
            block = blocks.setdefault(record.first(2, ""), [])
        elif record.kind == "ENDBLK":
            block = None
        elif block is not None and record.kind not in SUB_RECORDS:
            block.append(record)
    return GroupCodeFile(sections, blocks, header)
