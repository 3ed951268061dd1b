"""Length units: the one table every edge of the program converts with (inside, everything is mm)."""

from __future__ import annotations

from .errors import LacunaError

MM_PER_UNIT: dict[str, float] = {"mm": 1.0, "cm": 10.0, "m": 1000.0, "in": 25.4, "ft": 304.8}

# DXF header $INSUNITS codes (DXF reference, header section): 1 in, 2 ft, 4 mm, 5 cm, 6 m; 0 unitless.
INSUNITS_TO_UNIT: dict[int, str] = {1: "in", 2: "ft", 4: "mm", 5: "cm", 6: "m"}
UNIT_TO_INSUNITS: dict[str, int] = {unit: code for code, unit in INSUNITS_TO_UNIT.items()}


def mm_per(unit: str, *, where: str | None = None) -> float:
    """Millimetres in one ``unit``; a clear error for a unit we do not know."""
    try:
        return MM_PER_UNIT[unit]
    except KeyError:
        raise LacunaError(
            f"unknown length unit {unit!r}.",
            where=where,
            hint=f"Use one of {', '.join(MM_PER_UNIT)}.",
        ) from None
