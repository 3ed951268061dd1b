"""The job file (TOML) -> a validated :class:`Job`, every length in mm and every force in N.

Units are converted once, here. A key whose name carries its unit (``E_MPa``, ``fx_kN``, ``wy_kN_m``,
``density_kg_m3``) is always in that unit; every other length (thickness, positions, sizes, radii) is in the
file's ``units``. Positions stay along the *drawing's* axes (only scaled to mm): the drawing may be rotated,
and its :class:`~toolkit.model.Frame` maps them into the panel's local frame later (``toolkit.inputs``).

Every key is checked for type and range; an unknown key is reported with the nearest valid one. Errors name
the file and the key, e.g. ``job.toml [[load]] #2 fy_kN``.
"""

from __future__ import annotations

import difflib
import math
import re
import tomllib
from dataclasses import dataclass, field, replace
from importlib import resources
from pathlib import Path

from .errors import LacunaError
from .optimize.settings import SYMMETRIES, OptimizeSettings
from .model import Layers, LineLoad, Load, Material, MovingLoad, Point, PointLoad, Support
from .units import MM_PER_UNIT
from .voids.settings import CORNERS, FAMILIES, VoidOptions

TEMPLATE_RESOURCE = "data/job_template.toml"  # package data beside this module


# --- the values a job file yields -------------------------------------------------------------------------


@dataclass(frozen=True)
class PanelOptions:
    """[panel]: thickness and FE grid spacing in mm (None: not given)."""

    thickness_mm: float | None = None
    element_size_mm: float | None = None
    name: str = ""
    self_weight: bool = False


@dataclass(frozen=True)
class RuleOptions:
    """[rules]: a named fabrication profile and overrides of its values (mm; None: take the profile's)."""

    profile: str | None = None
    min_web_mm: float | None = None
    web_ratio: float | None = None  # a web at least this times the larger void's size (0: none)
    edge_cover_mm: float | None = None
    min_void_mm: float | None = None
    bearing_clearance_mm: float | None = None
    # the largest stress allowed at a void's edge, from the local models (None: not checked)
    max_edge_stress_MPa: float | None = None


@dataclass(frozen=True)
class Job:
    """A validated job file.

    ``supports`` and ``loads`` are as the file gives them: positions along the DRAWING's axes in mm (not yet
    in the panel's local frame), forces in N, line loads in N/mm; ``toolkit.inputs.build_panel`` maps them.
    Support fixity letters name the panel's local axes. ``given`` holds the keys the user actually wrote,
    as ``"table.key"`` (``"units"`` at the top level, ``"support"`` / ``"load"`` for the arrays), so that a
    later stage can let job values override a profile's and nothing else.
    """

    units: str = "mm"
    layers: Layers = field(default_factory=Layers)
    panel: PanelOptions = field(default_factory=PanelOptions)
    material: Material | None = None
    supports: tuple[Support, ...] = ()
    loads: tuple[Load, ...] = ()
    case_weights: tuple[tuple[str, float], ...] = ()
    optimize: OptimizeSettings = field(default_factory=OptimizeSettings)
    voids: VoidOptions = field(default_factory=VoidOptions)
    rules: RuleOptions = field(default_factory=RuleOptions)
    moving_loads: tuple[MovingLoad, ...] = ()  # drawing axes, mm, N; toolkit.moving makes their load cases
    given: frozenset[str] = frozenset()
    source: str = ""
    warnings: tuple[str, ...] = ()

    def is_set(self, key: str) -> bool:
        """Whether the job file wrote ``key`` ("rules.min_web", "optimize.penalty", "units", ...)."""
        return key in self.given


# --- the keys each table accepts (kept beside the readers below; the template test walks this list) ---------

TABLE_KEYS: dict[str, tuple[str, ...]] = {
    "panel": ("thickness", "element_size", "name", "self_weight"),
    "material": ("E_MPa", "nu", "density_kg_m3", "name"),
    "layers": ("outline", "openings", "keep", "support", "load"),
    "support": ("at", "from", "to", "fix"),
    "load": ("at", "from", "to", "fx_kN", "fy_kN", "wx_kN_m", "wy_kN_m", "case"),
    "moving_load": ("from", "to", "positions", "step", "fx_kN", "fy_kN", "wx_kN_m", "wy_kN_m", "length", "case",
                    "weight"),
    "optimize": (
        "volume_fraction",
        "evolution_rate",
        "filter_radius",
        "symmetry",
        "max_iterations",
        "penalty",
        "void_density",
        "admission_ratio",
        "convergence_tolerance",
    ),
    "voids": ("family", "sides", "bore_diameters", "max_types", "snap", "corner", "corner_size", "slot_widths",
              "symmetric", "regular"),
    "rules": ("profile", "min_web", "edge_cover", "min_void", "bearing_clearance", "web_ratio",
              "max_edge_stress_MPa"),
}
TOP_KEYS: tuple[str, ...] = ("units", "panel", "material", "layers", "support", "load", "cases", "optimize",
                             "voids", "rules", "moving_load")
ARRAY_TABLES = ("support", "load", "moving_load")

FIXITIES = ("xy", "x", "y")

N_PER_KN = 1000.0
N_PER_MM_PER_KN_PER_M = 1.0  # 1 kN/m = 1000 N / 1000 mm


# --- public API ---------------------------------------------------------------------------------------------


def default_job() -> Job:
    """The job used when no job file is given: defaults everywhere, no material, no thickness."""
    return Job()


def read_job(path) -> Job:
    """Read and validate a job file; errors name the file and the key at fault."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise LacunaError("the job file does not exist.", where=str(path),
                          hint="Check the path, or write a template with `lacuna init`.") from None
    except UnicodeDecodeError as exc:
        raise LacunaError(f"the job file is not UTF-8 text (byte {exc.start}).", where=str(path),
                          hint="Save it as UTF-8 plain text.") from None
    except OSError as exc:
        raise LacunaError(f"the job file cannot be read ({exc.strerror}).", where=str(path),
                          hint="Give the path of a readable .toml file.") from None
    return parse_job(text, source=str(path))


def parse_job(text: str, *, source: str = "job file") -> Job:
    """Validate the TOML ``text`` of a job file; ``source`` names it in messages."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise _toml_error(exc, source) from None
    return _Reader(source).job(data)


def template_text() -> str:
    """The commented job-file template (``lacuna init`` writes it)."""
    return resources.files("toolkit").joinpath(TEMPLATE_RESOURCE).read_text(encoding="utf-8")


# --- reading ------------------------------------------------------------------------------------------------


def _toml_error(exc: tomllib.TOMLDecodeError, source: str) -> LacunaError:
    text = str(exc)
    found = re.search(r"\(at line (\d+), column (\d+)\)", text)
    reason = re.sub(r"\s*\(at (line \d+, column \d+|end of document)\)", "", text)
    if found:
        where = f"{source} line {found.group(1)}, column {found.group(2)}"
    else:
        where = f"{source} (end of file)"
    return LacunaError(f"this is not valid TOML: {reason}.", where=where,
                       hint='Check quotes around text, "key = value" on one line, and [table] headers.')


def _suggest(key: str, valid) -> str:
    near = difflib.get_close_matches(key, list(valid), n=1, cutoff=0.6)
    return f'; did you mean "{near[0]}"?' if near else "."


def _is_number(value) -> bool:
    # TOML booleans are Python bools, which are ints: keep `thickness = true` out.
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _type_name(value) -> str:
    return {bool: "true/false", str: "text", list: "a list", dict: "a table", int: "a number",
            float: "a number"}.get(type(value), type(value).__name__)


class _Reader:
    """Reads one parsed job file; collects the keys given, the warnings, and whether any length appeared."""

    def __init__(self, source: str):
        self.source = source
        self.units = "mm"
        self.scale = 1.0
        self.given: set[str] = set()
        self.warnings: list[str] = []
        self.lengths_seen: list[str] = []

    # where-strings ------------------------------------------------------------------------------------
    def where(self, table: str | None, key: str | None = None, index: int | None = None) -> str:
        parts = [self.source]
        if table is not None:
            parts.append(f"[[{table}]] #{index}" if index is not None else f"[{table}]")
        if key is not None:
            parts.append(key)
        return " ".join(parts)

    # scalar readers -----------------------------------------------------------------------------------
    def number(self, value, where: str, *, low=None, high=None, low_open=False, high_open=False,
               unit: str = "", hint: str | None = None) -> float:
        if not _is_number(value):
            raise LacunaError(f"expected a number{unit and ' in ' + unit}, got {_type_name(value)} {value!r}.",
                              where=where, hint=hint or "Write a plain number, e.g. 12.5.")
        value = float(value)
        if not math.isfinite(value):
            raise LacunaError(f"expected a finite number, got {value}.", where=where,
                              hint=hint or "Write a plain number, e.g. 12.5.")
        below = low is not None and (value <= low if low_open else value < low)
        above = high is not None and (value >= high if high_open else value > high)
        if below or above:
            lo = "" if low is None else ("(" if low_open else "[") + f"{low:g}"
            hi = "" if high is None else f"{high:g}" + (")" if high_open else "]")
            if low is not None and high is not None:
                span = f"in {lo}, {hi}"
            elif low is not None:
                span = f"{'greater than' if low_open else 'at least'} {low:g}"
            else:
                span = f"{'less than' if high_open else 'at most'} {high:g}"
            raise LacunaError(f"must be {span}, got {value:g}{unit and ' ' + unit}.", where=where,
                              hint=hint or f"Give a value {span}.")
        return value

    def integer(self, value, where: str, *, low=None, high=None, hint: str | None = None) -> int:
        number = self.number(value, where, low=low, high=high, hint=hint)
        if not number.is_integer():
            raise LacunaError(f"expected a whole number, got {value!r}.", where=where,
                              hint=hint or "Write a whole number without a decimal point.")
        return int(number)

    def length(self, value, where: str, key: str, *, positive=True, hint: str | None = None) -> float:
        self.lengths_seen.append(key)
        number = self.number(value, where, low=0.0, low_open=positive, unit=self.units, hint=hint)
        return number * self.scale

    def text(self, value, where: str, *, hint: str = 'Write it in double quotes, e.g. "PANEL".') -> str:
        if not isinstance(value, str):
            raise LacunaError(f"expected text in quotes, got {_type_name(value)} {value!r}.", where=where, hint=hint)
        if not value.strip():
            raise LacunaError("must not be empty.", where=where, hint=hint)
        return value.strip()

    def choice(self, value, where: str, options: tuple[str, ...]) -> str:
        listed = ", ".join(f'"{o}"' for o in options)
        word = self.text(value, where) if isinstance(value, str) else value
        if word not in options:
            raise LacunaError(f"must be one of {listed}, got {value!r}{_suggest(str(value), options)}",
                              where=where, hint=f"Use one of {listed}.")
        return word

    def boolean(self, value, where: str) -> bool:
        if not isinstance(value, bool):
            raise LacunaError(f"expected true or false, got {_type_name(value)} {value!r}.", where=where,
                              hint="Write true or false, without quotes.")
        return value

    def point(self, value, where: str, key: str) -> Point:
        if not (isinstance(value, list) and len(value) == 2):
            raise LacunaError(f"expected a point [x, y], got {value!r}.", where=where,
                              hint=f"Write two numbers in {self.units}, e.g. {key} = [1500, 600].")
        self.lengths_seen.append(key)
        x, y = (self.number(v, where, unit=self.units) * self.scale for v in value)
        return (x, y)

    def lengths(self, value, where: str, key: str) -> tuple[float, ...]:
        if not isinstance(value, list) or not value:
            raise LacunaError(f"expected a non-empty list of lengths, got {value!r}.", where=where,
                              hint=f"Write e.g. {key} = [20, 25, 32] in {self.units}.")
        return tuple(sorted({self.length(v, where, key) for v in value}))

    # tables -------------------------------------------------------------------------------------------
    def table(self, data: dict, name: str) -> dict:
        """The table ``name`` (empty if absent), after rejecting unknown keys."""
        value = data.get(name, {})
        if not isinstance(value, dict):
            raise LacunaError(f"[{name}] must be a table, got {_type_name(value)}.", where=self.where(None, name),
                              hint=f"Write a [{name}] header and its keys on the lines below it.")
        self.check_keys(value, name, TABLE_KEYS[name], self.where(name))
        for key in value:
            self.given.add(f"{name}.{key}")
        return value

    def check_keys(self, table: dict, name: str, valid, where: str, *, array=False) -> None:
        for key in table:
            if key not in valid:
                header = f"[[{name}]]" if array else f"[{name}]"
                raise LacunaError(f'unknown key "{key}" in {header}{_suggest(key, valid)}', where=f"{where} {key}",
                                  hint=f"Valid keys in {header}: {', '.join(valid)}.")

    def job(self, data: dict) -> Job:
        for key in data:
            if key not in TOP_KEYS:
                kind = "table" if isinstance(data[key], (dict, list)) else "key"
                homes = [t for t, keys in TABLE_KEYS.items() if key in keys and t not in ARRAY_TABLES]
                hint = (f"{key} belongs under [{homes[0]}]: move it below that header." if homes and kind == "key"
                        else f"Valid top-level names: {', '.join(TOP_KEYS)}.")
                raise LacunaError(f'unknown {kind} "{key}"{_suggest(key, TOP_KEYS)}', where=self.where(None, key),
                                  hint=hint)
        self.units = self.read_units(data)
        job = Job(
            units=self.units,
            panel=self.read_panel(self.table(data, "panel")),
            material=self.read_material(self.table(data, "material")),
            layers=self.read_layers(self.table(data, "layers")),
            supports=self.read_supports(data),
            loads=self.read_loads(data),
            case_weights=self.read_cases(data),
            moving_loads=self.read_moving_loads(data),
            optimize=self.read_optimize(self.table(data, "optimize")),
            voids=self.read_voids(self.table(data, "voids")),
            rules=self.read_rules(self.table(data, "rules")),
            source=self.source,
        )
        if "units" not in data and self.lengths_seen:
            raise LacunaError(
                f"the job file gives lengths ({', '.join(dict.fromkeys(self.lengths_seen))}) but no units.",
                where=self.where(None, "units"),
                hint=f'Add a line such as units = "mm" at the top (one of {", ".join(MM_PER_UNIT)}).',
            )
        if job.panel.self_weight and (job.material is None or job.material.density_kg_m3 is None):
            raise LacunaError("self-weight needs the material's density.", where=self.where("panel", "self_weight"),
                              hint="Add density_kg_m3 to [material], or set self_weight = false.")
        # [voids] symmetric follows [optimize] symmetry unless it is given: the voids stage gets both in one value.
        voids = replace(job.voids, optimize_symmetry=job.optimize.symmetry)
        return replace(job, voids=voids, given=frozenset(self.given), warnings=tuple(self.warnings))

    def read_units(self, data: dict) -> str:
        if "units" not in data:
            return "mm"
        self.given.add("units")
        where = self.where(None, "units")
        unit = self.text(data["units"], where, hint=f"Use one of {', '.join(MM_PER_UNIT)}.").lower()
        if unit not in MM_PER_UNIT:
            raise LacunaError(f'unknown length unit "{data["units"]}"{_suggest(unit, MM_PER_UNIT)}', where=where,
                              hint=f"Use one of {', '.join(MM_PER_UNIT)}.")
        self.scale = MM_PER_UNIT[unit]
        return unit

    def read_panel(self, t: dict) -> PanelOptions:
        w = lambda key: self.where("panel", key)  # noqa: E731
        return PanelOptions(
            thickness_mm=self.length(t["thickness"], w("thickness"), "thickness",
                                     hint="The panel's out-of-plane thickness must be positive.")
            if "thickness" in t else None,
            element_size_mm=self.length(t["element_size"], w("element_size"), "element_size",
                                        hint="Leave element_size out to let the grid choose about 20,000 elements.")
            if "element_size" in t else None,
            name=self.text(t["name"], w("name"), hint='Write the name in double quotes, e.g. "panel A".')
            if "name" in t else "",
            self_weight=self.boolean(t["self_weight"], w("self_weight")) if "self_weight" in t else False,
        )

    def read_material(self, t: dict) -> Material | None:
        if not t:
            return None
        w = lambda key: self.where("material", key)  # noqa: E731
        for key in ("E_MPa", "nu"):
            if key not in t:
                raise LacunaError(f"[material] needs {key}.", where=w(key),
                                  hint="Give at least E_MPa (Young's modulus, MPa) and nu (Poisson's ratio).")
        E = self.number(t["E_MPa"], w("E_MPa"), low=0.0, low_open=True, unit="MPa",
                        hint="Young's modulus in MPa, e.g. 210000 for steel.")
        nu = self.number(t["nu"], w("nu"), low=0.0, high=0.5, high_open=True,
                         hint="Poisson's ratio lies in [0, 0.5) for plane stress, e.g. 0.3.")
        density = None
        if "density_kg_m3" in t:
            density = self.number(t["density_kg_m3"], w("density_kg_m3"), low=0.0, low_open=True, unit="kg/m3",
                                  hint="Density in kg/m3, e.g. 7850 for steel; leave it out if unknown.")
        name = self.text(t["name"], w("name"), hint='Write the name in double quotes, e.g. "steel S355".') \
            if "name" in t else ""
        return Material(E_MPa=E, nu=nu, density_kg_m3=density, name=name)

    def read_layers(self, t: dict) -> Layers:
        names = {key: self.text(t[key], self.where("layers", key)) for key in t}
        layers = Layers(**names)
        seen: dict[str, str] = {}
        for role in TABLE_KEYS["layers"]:
            layer = getattr(layers, role).upper()  # DXF layer names compare without case
            if layer in seen:
                raise LacunaError(f'layer "{getattr(layers, role)}" is named for both {seen[layer]} and {role}.',
                                  where=self.where("layers", role),
                                  hint="Each role needs a layer of its own.")
            seen[layer] = role
        return layers

    def array(self, data: dict, name: str) -> list[dict]:
        value = data.get(name, [])
        if isinstance(value, dict):
            raise LacunaError(f"[{name}] must be written with double brackets, [[{name}]].",
                              where=self.where(None, name),
                              hint=f"Start each {name} with a [[{name}]] line; several may follow one another.")
        if name in data:
            self.given.add(name)
        for i, item in enumerate(value, 1):
            if not isinstance(item, dict):
                raise LacunaError(f"expected a [[{name}]] table, got {_type_name(item)}.",
                                  where=self.where(name, index=i))
            self.check_keys(item, name, TABLE_KEYS[name], self.where(name, index=i), array=True)
        return value

    def segment_or_point(self, t: dict, name: str, i: int, kind_at: str, kind_seg: str):
        """(at,) or (from, to) of one support or load, checked for exactly one form and distinct ends."""
        w = lambda key=None: self.where(name, key, i)  # noqa: E731
        has_seg = "from" in t or "to" in t
        if "at" in t and has_seg:
            raise LacunaError(f"give either at ({kind_at}) or from + to ({kind_seg}), not both.", where=w(),
                              hint=f"Split it into two [[{name}]] tables.")
        if "at" in t:
            return (self.point(t["at"], w("at"), "at"),)
        if not has_seg:
            raise LacunaError(f"no position: give at = [x, y] ({kind_at}) or from = [x, y] and to = [x, y] "
                              f"({kind_seg}).", where=w(), hint=f"Positions are along the drawing's axes, in "
                              f"{self.units}.")
        for key in ("from", "to"):
            if key not in t:
                other = "to" if key == "from" else "from"
                raise LacunaError(f"{other} is given but {key} is missing; a segment needs both ends.",
                                  where=w(key), hint=f"Add {key} = [x, y], or use at = [x, y] for {kind_at}.")
        start, end = self.point(t["from"], w("from"), "from"), self.point(t["to"], w("to"), "to")
        if math.dist(start, end) == 0.0:
            raise LacunaError(f"from and to are the same point {list(t['from'])}; a segment needs two distinct "
                              "ends.", where=w("to"), hint=f"Use at = [x, y] for {kind_at}.")
        return (start, end)

    def read_supports(self, data: dict) -> tuple[Support, ...]:
        supports = []
        for i, t in enumerate(self.array(data, "support"), 1):
            points = self.segment_or_point(t, "support", i, "a point support", "a support along the outline")
            fix = self.choice(t["fix"], self.where("support", "fix", i), FIXITIES) if "fix" in t else "xy"
            supports.append(Support(points=points, fix=fix, source=self.where("support", index=i)))
        return tuple(supports)

    def read_loads(self, data: dict) -> tuple[Load, ...]:
        loads: list[Load] = []
        for i, t in enumerate(self.array(data, "load"), 1):
            w = lambda key=None: self.where("load", key, i)  # noqa: E731
            points = self.segment_or_point(t, "load", i, "a point load", "a line load")
            is_point = len(points) == 1
            own, other = (("fx_kN", "fy_kN"), ("wx_kN_m", "wy_kN_m"))[::1 if is_point else -1]
            kind = "a point load" if is_point else "a line load"
            for key in other:
                if key in t:
                    raise LacunaError(f"{key} belongs to a {'line' if is_point else 'point'} load; {kind} takes "
                                      f"{own[0]} / {own[1]}{_suggest(key, own)}", where=w(key),
                                      hint=f"Write the force as {own[0]} and/or {own[1]}.")
            if not any(key in t for key in own):
                raise LacunaError(f"{kind} needs a force: {own[0]} and/or {own[1]} (missing force keys).", where=w(),
                                  hint=f"Add e.g. {own[1]} = -10 (negative is along -y of the drawing).")
            unit, factor = ("kN", N_PER_KN) if is_point else ("kN/m", N_PER_MM_PER_KN_PER_M)
            fx, fy = (self.number(t.get(key, 0.0), w(key), unit=unit) * factor for key in own)
            case = (self.text(t["case"], w("case"), hint='Write the case name in double quotes, e.g. "main".')
                    if "case" in t else "main")
            if fx == 0.0 and fy == 0.0:
                self.warnings.append(f"{w()}: the load is zero in both directions; it has no effect.")
            if is_point:
                loads.append(PointLoad(at=points[0], force_N=(fx, fy), case=case, source=w()))
            else:
                loads.append(LineLoad(start=points[0], end=points[1], intensity_N_per_mm=(fx, fy), case=case,
                                      source=w()))
        return tuple(loads)

    def read_moving_loads(self, data: dict) -> tuple[MovingLoad, ...]:
        """[[moving_load]]: a point load or a patch travelling along a straight path (docs/moving-loads.md)."""
        moving = []
        for i, t in enumerate(self.array(data, "moving_load"), 1):
            w = lambda key=None: self.where("moving_load", key, i)  # noqa: E731
            if "at" in t:
                raise LacunaError("a travelling load has a path, not one point: give from and to.", where=w("at"))
            for key in ("from", "to"):
                if key not in t:
                    raise LacunaError(f"the travelling load's path needs {key} = [x, y].", where=w(key),
                                      hint="A travelling load runs along a straight path from one point to another.")
            start, end = self.point(t["from"], w("from"), "from"), self.point(t["to"], w("to"), "to")
            path = math.dist(start, end)
            if path == 0.0:
                raise LacunaError(f"from and to are the same point {list(t['from'])}: the load cannot travel.",
                                  where=w("to"), hint="Give the two ends of its path; for a load that stays put "
                                  "write a [[load]].")
            if ("positions" in t) == ("step" in t):
                raise LacunaError("give either positions (the number of stops) or step (their spacing), "
                                  + ("not both." if "positions" in t else "one of them."), where=w(),
                                  hint="E.g. positions = 9 for nine stops from end to end.")
            positions = step = None
            if "positions" in t:
                positions = self.integer(t["positions"], w("positions"), low=2,
                                         hint="At least 2 stops (the two ends of the path); for one position "
                                         "write a [[load]].")
            else:
                step = self.length(t["step"], w("step"), "step",
                                   hint=f"The spacing of the stops along the path, a positive length in "
                                   f"{self.units}.")
            point_keys, patch_keys = ("fx_kN", "fy_kN"), ("wx_kN_m", "wy_kN_m")
            is_patch = any(key in t for key in patch_keys)
            if is_patch and any(key in t for key in point_keys):
                raise LacunaError("give a point load (fx_kN / fy_kN) or a patch (wx_kN_m / wy_kN_m with length), "
                                  "not both.", where=w(), hint="Split it into two [[moving_load]] tables.")
            if not is_patch and not any(key in t for key in point_keys):
                raise LacunaError("the travelling load needs a force: fx_kN / fy_kN for a point load, or wx_kN_m "
                                  "/ wy_kN_m with length for a patch.", where=w(),
                                  hint="Add e.g. fy_kN = -10 (negative is along -y of the drawing).")
            if is_patch != ("length" in t):
                raise LacunaError("length belongs to a patch (wx_kN_m / wy_kN_m) and a patch needs one."
                                  if is_patch else "length is given but the load is a point load (fx_kN / fy_kN).",
                                  where=w("length"), hint="A patch is a line load of this length travelling "
                                  "along the path; a point load has no length.")
            length = 0.0
            if is_patch:
                length = self.length(t["length"], w("length"), "length",
                                     hint=f"The patch's length along the path, a positive length in {self.units}.")
                if length >= path:
                    raise LacunaError(f"the patch ({length / self.scale:g} {self.units}) is as long as its path "
                                      f"({path / self.scale:g} {self.units}) or longer: it has nowhere to travel.",
                                      where=w("length"), hint="Shorten the patch or lengthen the path; a load "
                                      "covering the whole path is a [[load]] line load.")
            keys, (unit, factor) = ((patch_keys, ("kN/m", N_PER_MM_PER_KN_PER_M)) if is_patch
                                    else (point_keys, ("kN", N_PER_KN)))
            force = tuple(self.number(t.get(key, 0.0), w(key), unit=unit) * factor for key in keys)
            if force == (0.0, 0.0):
                self.warnings.append(f"{w()}: the travelling load is zero in both directions; it has no effect.")
            case = (self.text(t["case"], w("case"), hint='Write the case name in double quotes, e.g. "crane".')
                    if "case" in t else "")
            weight = self.number(t["weight"], w("weight"), low=0.0, low_open=True,
                                 hint="The weight of the whole travelling load, shared by its stops; 1 by "
                                 "default.") if "weight" in t else 1.0
            moving.append(MovingLoad(start=start, end=end, positions=positions, step_mm=step,
                                     force_N=None if is_patch else force,
                                     intensity_N_per_mm=force if is_patch else None, length_mm=length, case=case,
                                     weight=weight, source=w()))
        return tuple(moving)

    def read_cases(self, data: dict) -> tuple[tuple[str, float], ...]:
        t = data.get("cases", {})
        if not isinstance(t, dict):
            raise LacunaError(f"[cases] must be a table, got {_type_name(t)}.", where=self.where(None, "cases"),
                              hint="Write [cases] and then one line per case: name = weight.")
        weights = []
        for name, weight in t.items():
            self.given.add(f"cases.{name}")
            value = self.number(weight, self.where("cases", name), low=0.0, low_open=True,
                                hint="A case weight is a positive number; leave the case out for weight 1.")
            weights.append((name, value))
        return tuple(weights)

    def read_optimize(self, t: dict) -> OptimizeSettings:
        w = lambda key: self.where("optimize", key)  # noqa: E731
        d = OptimizeSettings()
        get = lambda key, read, default: read(t[key], w(key)) if key in t else default  # noqa: E731
        return OptimizeSettings(
            volume_fraction=get("volume_fraction", lambda v, where: self.number(
                v, where, low=0.0, high=1.0, low_open=True,
                hint="The share of the design region kept solid, e.g. 0.6."), d.volume_fraction),
            evolution_rate=get("evolution_rate", lambda v, where: self.number(
                v, where, low=0.0, high=0.5, low_open=True,
                hint="The share of material removed per iteration; 0.01 to 0.05 is usual."), d.evolution_rate),
            filter_radius_mm=get("filter_radius", lambda v, where: self.length(
                v, where, "filter_radius", hint="Leave it out for three element sizes."), d.filter_radius_mm),
            symmetry=get("symmetry", lambda v, where: self.choice(v, where, SYMMETRIES), d.symmetry),
            max_iterations=get("max_iterations", lambda v, where: self.integer(
                v, where, low=1, hint="A whole number of iterations, e.g. 200."), d.max_iterations),
            penalty=get("penalty", lambda v, where: self.number(
                v, where, low=1.0, hint="The stiffness penalty exponent; 3 is usual."), d.penalty),
            void_density=get("void_density", lambda v, where: self.number(
                v, where, low=0.0, high=1.0, low_open=True, high_open=True,
                hint="The design density of a removed element (its stiffness is density^penalty); 0.001 is usual."), d.void_density),
            admission_ratio=get("admission_ratio", lambda v, where: self.number(
                v, where, low=0.0, high=1.0, low_open=True,
                hint="The largest share of elements added back per iteration, e.g. 0.02."), d.admission_ratio),
            convergence_tolerance=get("convergence_tolerance", lambda v, where: self.number(
                v, where, low=0.0, high=1.0, low_open=True, high_open=True,
                hint="The relative change of compliance that counts as converged, e.g. 0.001."),
                d.convergence_tolerance),
        )

    def read_voids(self, t: dict) -> VoidOptions:
        w = lambda key: self.where("voids", key)  # noqa: E731
        d = VoidOptions()
        corner = self.choice(t["corner"], w("corner"), CORNERS) if "corner" in t else d.corner
        corner_size = None
        if "corner_size" in t:
            if corner == "none":
                raise LacunaError('corner_size is given but corner = "none".', where=w("corner_size"),
                                  hint='Set corner = "chamfer" or "radius", or remove corner_size.')
            corner_size = self.length(t["corner_size"], w("corner_size"), "corner_size")
        elif corner != "none":
            raise LacunaError(f'corner = "{corner}" needs a corner_size.', where=w("corner_size"),
                              hint=f"Add corner_size = <length in {self.units}>.")
        return VoidOptions(
            family=self.choice(t["family"], w("family"), FAMILIES) if "family" in t else d.family,
            sides=self.integer(t["sides"], w("sides"), low=3, high=12,
                               hint="A polygon void has 3 to 12 sides.") if "sides" in t else d.sides,
            bore_diameters_mm=self.lengths(t["bore_diameters"], w("bore_diameters"), "bore_diameters")
            if "bore_diameters" in t else d.bore_diameters_mm,
            max_types=self.integer(t["max_types"], w("max_types"), low=1,
                                   hint="At least one void size.") if "max_types" in t else d.max_types,
            snap_mm=self.length(t["snap"], w("snap"), "snap", positive=False,
                                hint="0 turns snapping off.") if "snap" in t else d.snap_mm,
            corner=corner,
            corner_size_mm=corner_size,
            slot_widths_mm=self.lengths(t["slot_widths"], w("slot_widths"), "slot_widths")
            if "slot_widths" in t else d.slot_widths_mm,
            symmetric=self.boolean(t["symmetric"], w("symmetric")) if "symmetric" in t else d.symmetric,
            regular=self.boolean(t["regular"], w("regular")) if "regular" in t else d.regular,
        )

    def read_rules(self, t: dict) -> RuleOptions:
        w = lambda key: self.where("rules", key)  # noqa: E731
        lengths = {}
        for key in ("min_web", "edge_cover", "min_void", "bearing_clearance"):
            if key in t:
                lengths[f"{key}_mm"] = self.length(t[key], w(key), key, positive=False,
                                                   hint=f"A length in {self.units}, 0 or more.")
        profile = self.text(t["profile"], w("profile"), hint="Write the profile name in double quotes; "
                            "`lacuna profiles` lists them.") if "profile" in t else None
        ratio = self.number(t["web_ratio"], w("web_ratio"), low=0.0,
                            hint="A ratio of 0 or more, e.g. 0.5 for a web half the larger void's size."
                            ) if "web_ratio" in t else None
        edge = self.number(t["max_edge_stress_MPa"], w("max_edge_stress_MPa"), low=0.0, low_open=True, unit="MPa",
                           hint="The largest stress allowed at a void's edge in MPa, e.g. 12; leave it out to "
                           "not check it.") if "max_edge_stress_MPa" in t else None
        return RuleOptions(profile=profile, web_ratio=ratio, max_edge_stress_MPa=edge, **lengths)
