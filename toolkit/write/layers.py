"""Our output layers, their names and their look: one table the drawing copy and the SVG sheets both read, so a
void is the same colour on the sheet as in the drawing (docs/layers.md)."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class LayerLook:
    """How one of our layers looks: a true colour (with its nearest ACI index for R12/R2000 readers),
    a line type and a line weight in 1/100 mm (one of the DXF standard weights)."""

    name: str
    rgb: tuple[int, int, int]
    linetype: str
    lineweight: int
    description: str


DASHED = "LACUNA-DASHED"
# Dash and gap on paper-like proportions for a drawing at 1:1 in mm (our choice); scaled to the drawing's unit.
DASH_MM, GAP_MM = 12.0, 6.0

VOID_LAYERS = {
    "polygon": "LACUNA-VOID-POLYGON",
    "slot": "LACUNA-VOID-SLOT",
    "bore": "LACUNA-VOID-BORE",
}
FREEFORM, CENTRE, NOTE, CHECK = "LACUNA-FREEFORM", "LACUNA-CENTRE", "LACUNA-NOTE", "LACUNA-CHECK"
# Added after the first seven (CONTRACT.md: extend, never rename): ordinate dimensions from the datum.
DIM = "LACUNA-DIM"

# Our own choice of look (docs/layers.md): cut lines heavy and dark, the optimiser's raw outline light and
# dashed, marks and dimensions thin, violations in a warm red that stands apart from everything else.
LOOKS: tuple[LayerLook, ...] = (
    LayerLook(VOID_LAYERS["polygon"], (23, 94, 104), "CONTINUOUS", 50, "voids to cut: n-gons"),
    LayerLook(VOID_LAYERS["slot"], (92, 64, 140), "CONTINUOUS", 50, "voids to cut: slots"),
    LayerLook(VOID_LAYERS["bore"], (33, 86, 160), "CONTINUOUS", 50, "voids to cut: bores"),
    LayerLook(FREEFORM, (204, 138, 46), DASHED, 18, "optimiser's raw void outlines"),
    LayerLook(CENTRE, (110, 110, 110), "CONTINUOUS", 13, "void centre marks"),
    LayerLook(NOTE, (38, 38, 38), "CONTINUOUS", 25, "void schedule and notes"),
    LayerLook(CHECK, (200, 52, 44), "CONTINUOUS", 35, "fabrication-rule violations"),
    LayerLook(DIM, (96, 72, 48), "CONTINUOUS", 13, "ordinates of void centres from the datum"),
)
OUR_LAYERS: tuple[str, ...] = tuple(look.name for look in LOOKS)
