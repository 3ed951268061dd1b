"""The void schedule as CSV: one row per void to make, lengths in the drawing's unit."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from .shapes import schedule_decimals
from .summary import voids_json

if TYPE_CHECKING:
    from ..pipeline import OptimizeRun


def schedule_csv(run: OptimizeRun) -> str:
    """The void schedule as CSV: one row per void, lengths in the drawing's unit."""
    import csv
    import io

    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    unit = run.panel.frame.unit
    w.writerow(["id", "family", f"centre_x_{unit}", f"centre_y_{unit}", "sides", f"size_{unit}",
                f"length_{unit}", "angle_deg", f"area_{unit}2", "tool", "regular", f"points_{unit}",
                "peak_stress_MPa", "nominal_stress_MPa", "kt", f"least_web_{unit}", "web_stress_MPa", "edge_note"])
    d = schedule_decimals(unit)
    for v in voids_json(run):
        # The points a shop sets out from: an n-gon's corners, a slot's two arc centres; a bore needs its centre.
        points = v.get("corners") or v.get("ends") or []
        w.writerow([v["id"], v["family"], f"{v['centre'][0]:.{d}f}", f"{v['centre'][1]:.{d}f}", v["sides"],
                    f"{v['size']:.{d}f}", f"{v['length']:.{d}f}", f"{v['angle_deg']:.2f}", _area_text(v["area"]),
                    v["tool"], {True: "yes", False: "no"}.get(v.get("regular"), ""),
                    "; ".join(f"{x:.{d}f} {y:.{d}f}" for x, y in points), *_edge_cells(v, d)])
    return buf.getvalue()


def _area_text(area: float) -> str:
    """An area to six significant figures, never with an exponent (0.0497123 m2, 49712.3 mm2)."""
    if area == 0:
        return "0"
    digits = max(0, 5 - int(np.floor(np.log10(abs(area)))))
    text = f"{area:.{digits}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text


def _edge_cells(v: dict, decimals: int = 3) -> list[str]:
    """The schedule's edge-stress columns: peak, nominal, Kt, the narrowest web (a length in the drawing's unit,
    to ``decimals``) and its average stress, the note (empty cells where the local model gave no figure; the note
    says why)."""
    fmt = lambda x, d="{:.3g}": "" if x is None else d.format(x)  # noqa: E731
    web = min(v.get("webs") or [], key=lambda w: w["width"], default=None)
    return [fmt(v.get("peak_stress_MPa")), fmt(v.get("nominal_stress_MPa")), fmt(v.get("kt")),
            fmt(web and web["width"], "{:.%df}" % decimals), fmt(web and web["mean_stress_MPa"]),
            " ".join(filter(None, [v.get("edge_note", ""), web["note"] if web else ""]))]
