"""Fabrication profiles: named sets of rule values, each value with the source it comes from.

A profile is one TOML file in ``toolkit/rules/profiles/`` named after the profile. Each rule is a table of its
own holding the value, a ``source`` (a standard or design guide with clause, "common practice, no source", or
"from memory") and an optional ``note``; see docs/rules.md for the keys. ``rules_for`` turns a profile plus the
job file's own values into the :class:`toolkit.model.Rules` the fitting stage and the checks use.
"""

from __future__ import annotations

import difflib
import math
import tomllib
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Mapping

from ..errors import LacunaError
from ..model import Rules

PROFILE_DIR = Path(__file__).with_name("profiles")

JOB_SOURCE = "job file"
DEFAULT_SOURCE = "lacuna default, no source"

# rule -> (value key in the profile file, unit shown beside the value)
LENGTH_RULES = {
    "min_web": "material between any two voids, and between a void and an existing opening",
    "edge_cover": "material between any void and the panel outline",
    "min_void": "smallest void worth making: diameter of the largest circle inside it",
    "bearing_clearance": "solid radius around each support and point load",
    "least_feature": "shortest side of a made n-gon: no two of its corners closer than this",
}
OPTIONAL_RULES = ("least_feature",)
LIST_RULES = {
    "bore_diameters": "stock bore diameters",
    "slot_widths": "stock slot (cutter or former) widths",
}
RATIO_RULES = {
    "web_ratio": ("ratio", "web between two holes at least this times the larger one's size"),
    "min_void_per_thickness": ("ratio", "void at least this many times the panel thickness"),
    "depth_band": ("fraction", "void material within this middle fraction of the panel's depth"),
}
REQUIRED_RULES = (*(k for k in LENGTH_RULES if k not in OPTIONAL_RULES), *LIST_RULES, "corner")
# [tool_words]: the schedule's word for what makes each family, in the profile's trade (not a rule: no check reads it).
TOOL_FAMILIES = ("polygon", "slot", "bore")
CORNER_KINDS = ("none", "chamfer", "radius")
MATERIAL_KEYS = ("name", "E_MPa", "nu", "density_kg_m3", "source")


@dataclass(frozen=True)
class RuleValue:
    """One rule of a profile: its value, the unit it is in, and where the value comes from."""

    rule: str
    value: float | tuple[float, ...] | str
    unit: str
    source: str
    note: str = ""
    series: str = ""  # for stock sizes: whose sizes these are


@dataclass(frozen=True)
class MaterialHint:
    """The material a profile is meant for, with typical values (a hint for the job file, never applied)."""

    name: str
    E_MPa: float | None = None
    nu: float | None = None
    density_kg_m3: float | None = None
    source: str = ""


@dataclass(frozen=True)
class Profile:
    name: str
    description: str
    material: MaterialHint
    values: tuple[RuleValue, ...]
    path: str = ""
    tool_words: tuple[str, str, str] = Rules.tool_words  # polygon, slot, bore; without a [tool_words] table: these

    def rule(self, rule: str) -> RuleValue | None:
        return next((v for v in self.values if v.rule == rule), None)

    def value(self, rule: str):
        found = self.rule(rule)
        return None if found is None else found.value

    def source(self, rule: str) -> str:
        found = self.rule(rule)
        return "" if found is None else found.source


# --- reading profile files ---------------------------------------------------------------------------------


def list_profiles(directory: Path | str | None = None) -> list[str]:
    """Names of the profiles found (one TOML file each), sorted."""
    folder = Path(directory) if directory is not None else PROFILE_DIR
    return sorted(p.stem for p in folder.glob("*.toml"))


def load_profile(name: str, directory: Path | str | None = None) -> Profile:
    """The profile called ``name``; an unknown name is a LacunaError listing the known ones."""
    folder = Path(directory) if directory is not None else PROFILE_DIR
    known = list_profiles(folder)
    if not isinstance(name, str) or name not in known:
        raise LacunaError(
            f"unknown fabrication profile {name!r}.",
            where="[rules] profile",
            hint=_unknown_hint(str(name), known),
        )
    return read_profile_file(folder / f"{name}.toml")


def _unknown_hint(name: str, known: list[str]) -> str:
    if not known:
        return "No profiles are installed; give min_web, edge_cover, min_void and bearing_clearance in [rules]."
    nearest = max(known, key=lambda k: difflib.SequenceMatcher(None, name.lower(), k).ratio())
    return f'The nearest known profile is "{nearest}"; the known ones are {", ".join(known)}.'


def read_profile_file(path: Path | str) -> Profile:
    """Read and validate one profile file; every rule must carry a non-empty source."""
    path = Path(path)
    where = str(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise LacunaError(f"the profile file is not valid TOML ({exc}).", where=where,
                          hint="Fix the line named; each rule is a [table] with a value and a source.") from None
    except OSError as exc:
        raise LacunaError(f"the profile file cannot be read ({exc.strerror}).", where=where) from None

    name = data.get("name")
    if name != path.stem:
        raise LacunaError(
            f"the profile's name {name!r} does not match its file name {path.name!r}.",
            where=f"{where}, name",
            hint=f'Write name = "{path.stem}" at the top of the file (or rename the file).',
        )
    description = data.get("description")
    if not isinstance(description, str) or not description.strip():
        raise LacunaError("the profile has no description.", where=f"{where}, description",
                          hint='Add description = "..." saying what the profile is for.')

    known = {*REQUIRED_RULES, *OPTIONAL_RULES, *RATIO_RULES, "material", "tool_words", "name", "description"}
    for key in data:
        if key not in known:
            near = difflib.get_close_matches(key, sorted(known), n=1, cutoff=0.6)
            raise LacunaError(
                f"unknown rule {key!r} in a profile.",
                where=f"{where}, [{key}]",
                hint=(f'Did you mean "{near[0]}"? ' if near else "")
                + "docs/rules.md lists the rules a profile may hold.",
            )
    for key in REQUIRED_RULES:
        if key not in data:
            raise LacunaError(f"the profile lacks the rule {key!r}.", where=f"{where}, [{key}]",
                              hint="Every profile gives " + ", ".join(REQUIRED_RULES) + ", each with its source.")

    values: list[RuleValue] = []
    for key, table in data.items():
        if key in ("name", "description", "material", "tool_words"):
            continue
        values.extend(_read_rule(key, table, f"{where}, [{key}]"))
    return Profile(name=name, description=description.strip(), material=_read_material(data.get("material"), where),
                   values=tuple(values), path=where, tool_words=_read_tool_words(data.get("tool_words"), where))


def _table(table, where: str, keys: tuple[str, ...]) -> dict:
    if not isinstance(table, dict):
        raise LacunaError("each rule must be a table of its own.", where=where,
                          hint="Write it as [rule] followed by its value and source lines.")
    for key in table:
        if key not in keys:
            raise LacunaError(f"unknown key {key!r}.", where=where, hint=f"This rule takes {', '.join(keys)}.")
    source = table.get("source")
    if not isinstance(source, str) or not source.strip():
        raise LacunaError("the rule has no source.", where=where,
                          hint='Add source = "..." naming a standard or guide with clause, '
                               '"common practice, no source", or "from memory".')
    note = table.get("note", "")
    if not isinstance(note, str):
        raise LacunaError("note must be text.", where=where, hint="Write the note in double quotes.")
    return table


def _number(value, where: str, *, positive: bool = False, high: float | None = None) -> float:
    ok = isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)
    if ok:
        ok = value > 0 if positive else value >= 0
    if ok and high is not None:
        ok = value <= high
    if not ok:
        limit = "above 0" if positive else "0 or more"
        if high is not None:
            limit += f" and at most {high:g}"
        raise LacunaError(f"expected a number {limit}, got {value!r}.", where=where)
    return float(value)


def _read_rule(key: str, table, where: str) -> list[RuleValue]:
    if key in LENGTH_RULES:
        t = _table(table, where, ("value_mm", "source", "note"))
        if "value_mm" not in t:
            raise LacunaError("the rule has no value_mm.", where=where, hint="Add value_mm = <length in mm>.")
        return [RuleValue(key, _number(t["value_mm"], f"{where} value_mm"), "mm", t["source"].strip(),
                          t.get("note", "").strip())]
    if key in LIST_RULES:
        t = _table(table, where, ("values_mm", "series", "source", "note"))
        sizes = t.get("values_mm")
        if not isinstance(sizes, list) or not sizes:
            raise LacunaError("the rule needs a non-empty list values_mm.", where=where,
                              hint="Write values_mm = [25, 32, 38] with the stock sizes in mm.")
        series = t.get("series")
        if not isinstance(series, str) or not series.strip():
            raise LacunaError("the stock sizes do not say whose sizes they are.", where=where,
                              hint='Add series = "..." (e.g. common hole-saw sizes).')
        sizes_mm = tuple(sorted({_number(s, f"{where} values_mm", positive=True) for s in sizes}))
        return [RuleValue(key, sizes_mm, "mm", t["source"].strip(), t.get("note", "").strip(), series.strip())]
    if key in RATIO_RULES:
        field, _ = RATIO_RULES[key]
        t = _table(table, where, (field, "source", "note"))
        if field not in t:
            raise LacunaError(f"the rule has no {field}.", where=where, hint=f"Add {field} = <number>.")
        high = 1.0 if key == "depth_band" else None
        value = _number(t[field], f"{where} {field}", positive=key == "depth_band", high=high)
        return [RuleValue(key, value, field, t["source"].strip(), t.get("note", "").strip())]
    # corner
    t = _table(table, where, ("kind", "size_mm", "source", "note"))
    kind = t.get("kind")
    if kind not in CORNER_KINDS:
        raise LacunaError(f"corner kind must be one of {', '.join(CORNER_KINDS)}, got {kind!r}.", where=where)
    size = _number(t.get("size_mm", 0.0), f"{where} size_mm")
    if kind != "none" and size <= 0:
        raise LacunaError(f"a {kind} corner needs size_mm above 0.", where=where)
    note = t.get("note", "").strip()
    return [RuleValue("corner", kind, "", t["source"].strip(), note),
            RuleValue("corner_size", size if kind != "none" else 0.0, "mm", t["source"].strip(), note)]


def _read_tool_words(table, where: str) -> tuple[str, str, str]:
    if table is None:
        return Rules.tool_words
    w = f"{where}, [tool_words]"
    t = _table(table, w, (*TOOL_FAMILIES, "source", "note"))
    words = tuple(t.get(family) for family in TOOL_FAMILIES)
    for family, word in zip(TOOL_FAMILIES, words):
        if not isinstance(word, str) or not word.strip():
            raise LacunaError(f"no word for the tool that makes a {family}.", where=f"{w} {family}",
                              hint='Write polygon, slot and bore words, e.g. bore = "hole saw".')
    return tuple(word.strip() for word in words)


def _read_material(table, where: str) -> MaterialHint:
    if table is None:
        return MaterialHint(name="")
    w = f"{where}, [material]"
    if not isinstance(table, dict):
        raise LacunaError("material must be a table.", where=w)
    for key in table:
        if key not in MATERIAL_KEYS:
            raise LacunaError(f"unknown key {key!r}.", where=w, hint=f"[material] takes {', '.join(MATERIAL_KEYS)}.")
    nums = {k: _number(table[k], f"{w} {k}", positive=k == "E_MPa") if k in table else None
            for k in ("E_MPa", "nu", "density_kg_m3")}
    if any(v is not None for v in nums.values()) and not str(table.get("source", "")).strip():
        raise LacunaError("the material values have no source.", where=w, hint='Add source = "...".')
    return MaterialHint(name=str(table.get("name", "")), source=str(table.get("source", "")).strip(), **nums)


# --- profile + job values -> Rules --------------------------------------------------------------------------

_RULES_FIELD = {
    "min_web": "min_web_mm",
    "edge_cover": "edge_cover_mm",
    "min_void": "min_void_mm",
    "bearing_clearance": "bearing_clearance_mm",
    "bore_diameters": "bore_diameters_mm",
    "slot_widths": "slot_widths_mm",
    "corner": "corner",
    "corner_size": "corner_size_mm",
    "web_ratio": "web_ratio",
    "min_void_per_thickness": "min_void_per_thickness",
    "depth_band": "depth_band",
    "least_feature": "least_feature_mm",
}


def _override_key(key: str) -> str:
    """Accept both the job key ("min_web") and the Rules field name ("min_web_mm")."""
    for rule, name in _RULES_FIELD.items():
        if key in (rule, name):
            return rule
    raise LacunaError(
        f"{key!r} is not a fabrication rule.",
        where=f"[rules] {key}",
        hint=_suggestion(key) + "The rules are " + ", ".join(_RULES_FIELD) + ".",
    )


def _suggestion(key: str) -> str:
    near = difflib.get_close_matches(key, list(_RULES_FIELD), n=1, cutoff=0.6)
    return f'Did you mean "{near[0]}"? ' if near else ""


def _override_value(rule: str, value):
    where = f"[rules] {rule}"
    if rule in ("bore_diameters", "slot_widths"):
        if isinstance(value, (str, bytes)) or not hasattr(value, "__iter__"):
            raise LacunaError(f"{rule} must be a list of sizes, got {value!r}.", where=where,
                              hint=f"Write {rule} = [25, 32, 38].")
        sizes = tuple(sorted({_number(v, where, positive=True) for v in value}))
        if not sizes:
            raise LacunaError(f"{rule} is empty.", where=where, hint="List at least one stock size.")
        return sizes
    if rule == "corner":
        if value not in CORNER_KINDS:
            raise LacunaError(f"corner must be one of {', '.join(CORNER_KINDS)}, got {value!r}.", where=where)
        return value
    if rule == "depth_band":
        return _number(value, where, positive=True, high=1.0)
    return _number(value, where)


def rules_for(profile_name: str | None, overrides: Mapping[str, object] | None = None, *,
              directory: Path | str | None = None) -> Rules:
    """The rules in force: the profile's values, with the job file's values over them.

    ``overrides`` maps a rule ("min_web", "edge_cover", "min_void", "bearing_clearance", "bore_diameters",
    "slot_widths", "corner", "corner_size", or a profile-specific rule) to the job's value in mm; ``None``
    values are skipped, so a job's unset keys can be passed as they are. An overridden value's source becomes
    "job file". With no profile, the values are lacuna's defaults (``toolkit.model.Rules``).
    """
    values: dict[str, object] = {}
    sources: dict[str, str] = {}
    if profile_name is None:
        defaults = Rules()
        for rule, name in _RULES_FIELD.items():
            values[rule] = getattr(defaults, name)
            sources[rule] = DEFAULT_SOURCE
        name_out = "custom"
        words = Rules.tool_words
    else:
        profile = load_profile(profile_name, directory)
        for rv in profile.values:
            values[rv.rule] = rv.value
            sources[rv.rule] = rv.source
        name_out = profile.name
        words = profile.tool_words

    for key, value in (overrides or {}).items():
        if value is None:
            continue
        rule = _override_key(key)
        values[rule] = _override_value(rule, value)
        sources[rule] = JOB_SOURCE
    if values.get("corner", "none") == "none":
        values["corner_size"] = 0.0
    elif not values.get("corner_size", 0.0) > 0:
        raise LacunaError(f"a {values['corner']} corner needs a size above 0.", where="[rules] corner_size",
                          hint="Give corner_size in the job file's length unit.")

    kwargs = {_RULES_FIELD[rule]: value for rule, value in values.items() if rule in _RULES_FIELD}
    valid = {f.name for f in fields(Rules)}
    kwargs = {k: v for k, v in kwargs.items() if k in valid}
    ordered = tuple((rule, sources[rule]) for rule in _RULES_FIELD if rule in sources and rule in values)
    return Rules(profile=name_out, sources=ordered, tool_words=words, **kwargs)


# --- `lacuna profiles` --------------------------------------------------------------------------------------


def profiles_table(directory: Path | str | None = None) -> dict:
    """Every profile with every value and its source beside it, ready for ``json.dumps``."""
    out = []
    for name in list_profiles(directory):
        p = load_profile(name, directory)
        rules = {}
        for rv in p.values:
            entry = {"value": list(rv.value) if isinstance(rv.value, tuple) else rv.value, "unit": rv.unit,
                     "source": rv.source}
            if rv.series:
                entry["series"] = rv.series
            if rv.note:
                entry["note"] = rv.note
            rules[rv.rule] = entry
        m = p.material
        material = {"name": m.name, "E_MPa": m.E_MPa, "nu": m.nu, "density_kg_m3": m.density_kg_m3,
                    "source": m.source}
        out.append({"name": p.name, "description": p.description, "material": material, "rules": rules,
                    "ceiling_percent": _ceilings(rules_for(name, directory=directory))})
    return {"profiles": out}


def _ceilings(rules: Rules) -> dict:
    """The most any layout of each family opens of the ground its voids stand on under ``rules`` (per cent; None
    where the rules set no bound), ``voids.ceiling``: the profile's own stock lists, slots cut at the bore sizes
    where it has no slot widths."""
    from ..voids.ceiling import family_ceiling

    out = {}
    for family in ("polygon", "slot", "bore"):
        c = family_ceiling(family, min_web_mm=rules.min_web_mm, web_ratio=float(rules.web_ratio or 0.0),
                           slot_widths_mm=rules.slot_widths_mm or rules.bore_diameters_mm,
                           bore_diameters_mm=rules.bore_diameters_mm, min_void_mm=rules.min_void_mm)
        out[family] = round(100.0 * c.share, 1) if c is not None else None
    return out


def _show(value, unit: str) -> str:
    if isinstance(value, (list, tuple)):
        return ", ".join(f"{v:g}" for v in value) + (f" {unit}" if unit else "")
    if isinstance(value, float):
        if unit == "fraction":
            return f"{value:g} of the depth"
        if unit == "ratio":
            return f"{value:g} x"
        return f"{value:g} {unit}".strip()
    return str(value)


def profiles_text(table: dict | None = None) -> str:
    """A plain-text rendering of :func:`profiles_table` for ``lacuna profiles``."""
    table = profiles_table() if table is None else table
    lines: list[str] = []
    for p in table["profiles"]:
        lines.append(f"{p['name']} — {p['description']}")
        m = p["material"]
        if m["name"]:
            figures = ", ".join(f"{label} {m[key]:g}" for key, label in
                                (("E_MPa", "E MPa"), ("nu", "nu"), ("density_kg_m3", "kg/m3")) if m[key] is not None)
            lines.append(f"  material: {m['name']} ({figures})  [{m['source']}]")
        width = max(len(k) for k in p["rules"])
        for rule, entry in p["rules"].items():
            lines.append(f"  {rule:<{width}}  {_show(entry['value'], entry['unit'])}  [{entry['source']}]")
            if entry.get("series"):
                lines.append(f"  {'':<{width}}  sizes: {entry['series']}")
        ceilings = p.get("ceiling_percent")
        if ceilings:
            shares = ", ".join(f"{words} {'no bound' if ceilings[f] is None else f'{ceilings[f]:.0f} %'}"
                               for f, words in (("polygon", "n-gons"), ("slot", "slots"), ("bore", "bores")))
            lines.append(f"  {'ceiling':<{width}}  any layout opens at most: {shares} of the ground its voids stand "
                         "on (docs/voids.md)")
        lines.append("")
    return "\n".join(lines).rstrip() + "\n"
