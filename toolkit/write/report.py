"""The written report of an optimisation: Markdown that links the SVG figures written beside it."""

from __future__ import annotations

from ..about import CAUTION
from ..units import MM_PER_UNIT


def _num(value, digits: int = 4) -> str:
    if value is None:
        return "–"
    return f"{value:.{digits}g}"


# Decimals of a length or coordinate in the report's tables: a tenth of a millimetre in every unit (the schedule
# CSV carries the full figures).
_REPORT_DECIMALS = {"mm": 1, "cm": 2, "m": 4, "in": 3, "ft": 4}


def _len(value: float, unit: str) -> str:
    """A length or coordinate in the drawing's ``unit``, to about a tenth of a millimetre."""
    return f"{value:.{_REPORT_DECIMALS.get(unit, 4)}f}"


def _self_weight_lines(s: dict) -> list[str]:
    """The panel's own weight, where the job includes it: how much, and how the optimiser treats it."""
    weight = s.get("solid", {}).get("self_weight_kN")
    if not weight:
        return []
    return [f"**Self-weight** is included: {weight:.4g} kN for the panel as drawn, down the panel in every load case. "
            "The optimiser and the voids' shape optimisation weigh only the material they keep, so a lighter panel "
            "carries less of it (and may even be stiffer than the solid one).", ""]


# Drawings in inches or feet get the deflections in inches beside the millimetres (the JSON keys stay in mm).
IMPERIAL = ("in", "ft")
MM_PER_INCH = MM_PER_UNIT["in"]


def _limit_and_shape(s: dict) -> list[str]:
    """What held the layout back, and the shape optimisation's before and after."""
    out = []
    if s.get("limit"):
        limit = s["limit"]
        out += [f"**What held the layout back.** {limit[:1].upper()}{limit[1:]}", ""]
    if s.get("capture_ceiling"):
        words = s["capture_ceiling"]
        out += [f"**The rules' ceiling.** {words[:1].upper()}{words[1:]}", ""]
    shape = s.get("shape_optimisation")
    if shape:
        out += [
            "**Shape optimisation of the voids to make** (its own analyses: emptied elements at a trace of stiffness, "
            + ("the panel's loads, its own weight less the voids'" if s.get("solid", {}).get("self_weight_kN")
               else "the panel's loads") + "):",
            "",
            "| | first fit | same material, moved | grown |",
            "|---|---:|---:|---:|",
            f"| compliance, N mm | {_num(shape['compliance_first_fit_Nmm'], 6)} | "
            f"{_num(shape['compliance_same_mass_Nmm'], 6)} | {_num(shape['compliance_grown_Nmm'], 6)} |",
            f"| material removed | {shape['removed_first_fit_percent']:.1f} % | "
            f"{shape['removed_same_mass_percent']:.1f} % | {shape['removed_grown_percent']:.1f} % |",
            "",
            f"Every step held every fabrication rule; {shape['analyses']} analyses.",
            "",
        ]
    return out


def _travel_lines(s: dict) -> list[str]:
    """Each travelling load: the compliance at every stop, solid / freeform / made."""
    out = []
    unit = s["units"]
    for t in s.get("moving_loads", []):
        patch = f"a patch {t['patch_length']:g} {unit} long" if t["patch_length"] else "a point load"
        out += [
            f"**Travelling load \"{t['case']}\"** ({t['source']}): {patch} at {t['stops']} stops, optimised for all "
            "of them at once (load cases of equal weight, their compliances summed). Compliance at each stop, "
            "N mm:",
            "",
            f"| stop | x, {unit} | y, {unit} | solid panel | freeform layout | voids to make |",
            "|---|---:|---:|---:|---:|---:|",
        ]
        for k, p in enumerate(t["positions"], 1):
            out.append(f"| {k} | {_len(p['at'][0], unit)} | {_len(p['at'][1], unit)} | "
                       f"{_num(p['compliance_solid_Nmm'], 6)} | {_num(p['compliance_freeform_Nmm'], 6)} | "
                       f"{_num(p['compliance_rationalized_Nmm'], 6)} |")
        out.append(f"| largest | | | {_num(t['compliance_solid_max_Nmm'], 6)} | "
                   f"{_num(t['compliance_freeform_max_Nmm'], 6)} | {_num(t['compliance_rationalized_max_Nmm'], 6)} |")
        out.append("")
    return out


def _largest_edge_stress(s: dict):
    figures = [v["peak_stress_MPa"] for v in s.get("voids", []) if v.get("peak_stress_MPa") is not None]
    return max(figures) if figures else None


def _edge_section(s: dict) -> list[str]:
    """Peak stress at each void's edge from its local model, the nominal stress, Kt and the narrowest web."""
    voids = s.get("voids", [])
    if not voids or not any("peak_stress_MPa" in v for v in voids):
        return []
    unit = s["units"]
    limit = s.get("rules", {}).get("max_edge_stress_MPa")
    out = [
        "",
        "## Stress at the void edges",
        "",
        "The grid cuts each void by area fraction, so its stresses next to a void are not edge stresses. Each void "
        "was analysed again on its own: a window round it meshed with six-node triangles that follow every edge in "
        "it, graded to small elements at the void's edge, its sides moved as the panel's grid moved them. The "
        "**peak** is the largest stress along the edge (the stress along a free edge is a principal stress); the "
        "**nominal** stress is the solid panel's stress at the void (its stress averaged over the void's area, the "
        "larger principal stress); **Kt** = peak / nominal, both in the load case of the peak. The web is the "
        "narrowest section to a neighbouring void or opening, with the average stress across it."
        + (f" Allowed at an edge: {limit:g} MPa ([rules] max_edge_stress_MPa)." if limit is not None else ""),
        "",
        f"| id | peak, MPa | at ({unit}) | case | nominal, MPa | Kt | narrowest web, {unit} | web stress, MPa | note |",
        "|---|---:|---|---|---:|---:|---:|---:|---|",
    ]
    for v in voids:
        web = min(v.get("webs") or [], key=lambda w: w["width"], default=None)
        peak = v.get("peak_stress_MPa")
        at = v.get("peak_stress_at")
        sense = {"tension": " (t)", "compression": " (c)"}.get(v.get("peak_stress_sense", ""), "")
        note = " ".join(filter(None, [v.get("edge_note", ""), web["note"] if web else ""]))
        web_text = f"{_len(web['width'], unit)} to {web['to']}" if web else "–"
        out.append(
            f"| {v['id']} | {_num(peak)}{sense if peak is not None else ''} | "
            f"{f'{_len(at[0], unit)}, {_len(at[1], unit)}' if at else '–'} | {v.get('peak_stress_case') or '–'} | "
            f"{_num(v.get('nominal_stress_MPa'))} | {_num(v.get('kt'), 3)} | "
            f"{web_text} | "
            f"{_num(web['mean_stress_MPa'] if web else None)} | {note} |"
        )
    out += ["", "(t) tension, (c) compression. A large Kt over a small nominal stress marks a void where the solid "
            "panel was hardly stressed: judge the peak itself. Sharp corners have no finite elastic peak."]
    return out


def report_markdown(summary: dict, *, result_svg: str, convergence_svg: str, schedule_csv: str, date: str,
                    layout_svg: str | None = None) -> str:
    """The report for ``lacuna optimize``'s JSON ``summary``; figure and schedule names are relative links."""
    s = summary
    sol = s["solid"]
    unit = s["units"]
    rules = s["rules"]
    lines = [
        f"# {s['panel']}: lightening study",
        "",
        f"Drawing `{s['drawing']}`, lengths in {unit}; made by lacuna {s['lacuna_version']} on {date}.",
        "",
        f"> **Caution.** {CAUTION}",
        "",
        "## What was saved, and what it cost",
        "",
        "| | solid panel | optimiser's freeform layout | voids to make |",
        "|---|---:|---:|---:|",
        f"| compliance, N mm | {_num(s['compliance_solid_Nmm'], 6)} | {_num(s['compliance_freeform_Nmm'], 6)} "
        f"| {_num(s['compliance_rationalized_Nmm'], 6)} |",
        f"| largest deflection, mm | {_num(sol['max_deflection_mm'])} | {_num(s['max_deflection_freeform_mm'])} | "
        f"{_num(s['max_deflection_rationalized_mm'])} |",
        *([f"| largest deflection, in | {_num(sol['max_deflection_mm'] / MM_PER_INCH)} | "
           f"{_num(s['max_deflection_freeform_mm'] / MM_PER_INCH)} | "
           f"{_num(s['max_deflection_rationalized_mm'] / MM_PER_INCH)} |"] if s.get("units") in IMPERIAL else []),
        f"| largest von Mises stress on the grid, MPa | {_num(sol['max_von_mises_MPa'])} | | "
        f"{_num(s['max_von_mises_rationalized_MPa'])} |",
        *([f"| largest stress at a void's edge (local models), MPa | | | {_num(top)} |"]
          if (top := _largest_edge_stress(s)) is not None else []),
        f"| material kept in the design region | 100 % | {100 * s['volume_fraction_final']:.1f} % | |",
        f"| material removed from the panel | 0 % | {s['mass_removed_freeform_percent']:.1f} % | "
        f"{s['mass_removed_percent']:.1f} %"
        + (f" ({s['mass_removed_kg']:.1f} kg)" if s.get("mass_removed_kg") is not None else "") + " |",
        *([f"| kept of the freeform saving | | | {s['capture_percent']:.0f} % |"]
          if s.get("capture_percent") is not None else []),
        "",
        f"Stiffness lost by the voids to make: compliance {s['stiffness_loss_percent']:+.1f} % against the solid "
        "panel. All three columns are analyses of drawn geometry with the openings cut exactly from one grid; the "
        f"optimiser's own figure for its layout (removed elements at a trace of stiffness) is "
        f"{_num(s['compliance_optimizer_Nmm'], 6)} N mm.",
        "",
        f"The optimiser ran {s['iterations']} iterations "
        f"({'converged' if s['converged'] else 'stopped at the iteration limit, NOT converged'}); the volume "
        f"target {s['volume_fraction_target']:g} is the {s['volume_fraction_basis']}.",
        "",
        *_self_weight_lines(s),
        *_limit_and_shape(s),
        *_travel_lines(s),
        f"![Voids to make: the panel as it will be made, ordinates from the datum]({result_svg})",
        "",
        *([f"![The optimiser's layout under the voids to make]({layout_svg})", ""] if layout_svg else []),
        f"![Convergence]({convergence_svg})",
        "",
        "## Voids",
        "",
        f"Schedule as CSV: [{schedule_csv}]({schedule_csv}).",
        "",
        f"| id | family | centre x, {unit} | centre y, {unit} | sides | size, {unit} | area, {unit}² | made with |",
        "|---|---|---:|---:|---:|---:|---:|---|",
    ]
    for v in s["voids"]:
        lines.append(f"| {v['id']} | {v['family']} | {_len(v['centre'][0], unit)} | {_len(v['centre'][1], unit)} | "
                     f"{v['sides'] or ''} | {v['size']:.4g} | {v['area']:.6g} | {v['tool']} |")
    if not s["voids"]:
        lines.append("| – | no void could be made under the rules | | | | | | |")
    lines += _edge_section(s)
    lines += [
        "",
        f"## Fabrication rules: profile {rules['profile']}",
        "",
        "Every rule in force, its source, and where the voids to make come closest to it (measured on the final "
        "geometry as the proof below measures it; margin = measured less required).",
        "",
        "| rule | required | source | tightest place in the layout | margin |",
        "|---|---:|---|---|---:|",
    ]
    margins = rules.get("margins") or []
    shown = set()
    for m in margins:
        key = m["rule"]
        shown.add(key)
        source = rules["sources"].get(key, "") or _derived_source(key, rules)
        if key in ("bore_diameters", "slot_widths"):
            required = ", ".join(f"{d:g}" for d in rules.get(key) or []) + f" {unit}" if rules.get(key) else "stock"
        elif m["required"] is None:
            required = "–"
        elif key == "web_ratio":
            required = f"{rules.get('web_ratio', 0):g} x the larger void's size: {m['required']:.4g} {unit} there"
        else:
            required = f"{m['required']:.4g} {unit}"
        margin = "–" if m["margin"] is None else f"{m['margin']:+.1f} {unit}"
        lines.append(f"| {key} | {required} | {source} | {m['where']} | {margin} |")
    if "web_ratio" in shown and "min_web" not in shown:
        lines.append(f"| min_web | {rules['min_web']:g} {unit} | {rules['sources'].get('min_web', '')} | the web "
                     "ratio asks more at the tightest web (row web_ratio) | – |")
    if rules.get("web_ratio") and "min_web" in shown and "web_ratio" not in shown:
        lines.append(f"| web_ratio | {rules['web_ratio']:g} x the larger void's size | "
                     f"{rules['sources'].get('web_ratio', '')} | the minimum web asks more at the tightest web "
                     "(row min_web) | – |")
    for key in ("min_web", "edge_cover", "min_void", "bearing_clearance"):
        if key not in shown and not (key == "min_web" and "web_ratio" in shown):
            lines.append(f"| {key} | {rules[key]:g} {unit} | {rules['sources'].get(key, '')} | no void to measure "
                         "| – |")
    if rules.get("bore_diameters") and "bore_diameters" not in shown:
        sizes = ", ".join(f"{d:g}" for d in rules["bore_diameters"])
        lines.append(f"| bore_diameters | {sizes} {unit} | {rules['sources'].get('bore_diameters', '')} | no bore | – |")
    lines += ["", "### Proof of the rules on the final geometry", ""]
    if rules["violations"]:
        lines.append(f"**{len(rules['violations'])} rule violations remain** — the layout is not ready to make:")
        lines.append("")
        lines += [f"- {v['rule']} at ({_len(v['where'][0], unit)}, {_len(v['where'][1], unit)}): {v['message']}"
                  for v in rules["violations"]]
    else:
        lines.append("Every rule was checked on the final geometry with exact distances: no violation.")
    if s.get("changes") or s.get("dropped"):
        lines += ["", "### What the fitting changed", ""]
        lines += [f"- {c}" for c in s.get("changes", [])]
        lines += [f"- {d}" for d in s.get("dropped", [])]
    if s.get("warnings"):
        lines += ["", "## Warnings", ""] + [f"- {w}" for w in s["warnings"]]
    if s.get("notes"):
        lines += ["", "## Notes on the fitting", ""] + [f"- {n}" for n in s["notes"]]
    lines += ["", "---", "", CAUTION, ""]
    return "\n".join(lines)


def _derived_source(key: str, rules: dict) -> str:
    """Where a rule without a source line of its own comes from."""
    if key == "web_ratio":
        return rules["sources"].get("web_ratio") or "the profile's web ratio (with the minimum web)"
    if key == "keep":
        return "the drawing's KEEP zones"
    return ""
