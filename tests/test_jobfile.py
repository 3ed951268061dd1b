"""The job file: validation of every key, unit conversion, the template.

Check values for units come from the exact definitions 1 in = 25.4 mm and 1 ft = 12 in = 304.8 mm
(international yard and pound agreement, 1959), 1 m = 1000 mm and 1 cm = 10 mm (SI prefixes), and
1 kN = 1000 N, 1 kN/m = 1000 N / 1000 mm = 1 N/mm (SI prefixes).
"""

from __future__ import annotations

import re
import textwrap

import pytest

from toolkit.errors import LacunaError
from toolkit.jobfile import TABLE_KEYS, TOP_KEYS, Job, default_job, parse_job, read_job, template_text
from toolkit.model import Layers, LineLoad, PointLoad

BASE = """
units = "mm"
[panel]
thickness = 90
[material]
E_MPa = 11500
nu = 0.3
"""


def job(extra: str = "", base: str = BASE) -> Job:
    return parse_job(textwrap.dedent(base) + textwrap.dedent(extra), source="job.toml")


def error(text: str, base: str = BASE) -> LacunaError:
    with pytest.raises(LacunaError) as info:
        job(text, base)
    return info.value


def in_panel(text: str) -> tuple[str, str]:
    """(extra, base): a "[table]" snippet is appended; a bare line replaces the base's [panel] thickness."""
    if text.startswith("["):
        return text, BASE
    return "", BASE.replace("thickness = 90", text)


# --- a plain job ---------------------------------------------------------------------------------------------


def test_minimal_job_reads_values_and_defaults():
    j = job()
    assert j.units == "mm"
    assert j.panel.thickness_mm == 90.0
    assert j.material.E_MPa == 11500.0 and j.material.nu == 0.3 and j.material.density_kg_m3 is None
    assert j.layers == Layers()
    assert j.supports == () and j.loads == ()
    # Defaults per CONTRACT.md and the published BESO parameters (Huang & Xie 2010, from memory:
    # penalty 3, void density 0.001, evolution ratio 2 %, convergence 0.1 %).
    assert j.optimize.volume_fraction == 0.6
    assert j.optimize.evolution_rate == 0.02
    assert j.optimize.penalty == 3.0
    assert j.optimize.void_density == 1e-3
    assert j.optimize.convergence_tolerance == 0.001
    assert j.optimize.filter_radius_mm is None
    assert j.voids.sides == 6 and j.voids.family == "polygon" and j.voids.corner == "none"
    assert j.rules.profile is None and j.rules.min_web_mm is None
    assert j.given == {"units", "panel.thickness", "material.E_MPa", "material.nu"}
    assert j.is_set("panel.thickness") and not j.is_set("rules.min_web")


def test_default_job_has_no_material_and_no_thickness():
    j = default_job()
    assert j.material is None and j.panel.thickness_mm is None and j.given == frozenset()


def test_read_job_names_the_file(tmp_path):
    path = tmp_path / "job.toml"
    path.write_text(textwrap.dedent(BASE) + "[panel2]\n", encoding="utf-8")
    with pytest.raises(LacunaError) as info:
        read_job(path)
    assert str(path) in str(info.value) and '"panel2"' in str(info.value)


def test_missing_job_file_is_a_clear_error(tmp_path):
    with pytest.raises(LacunaError, match="does not exist"):
        read_job(tmp_path / "nowhere.toml")


def test_supports_and_loads_as_given_in_mm_and_N():
    j = job("""
        [[support]]
        from = [0, 0]
        to = [150, 0]
        [[support]]
        at = [3000, 0]
        fix = "y"
        [[load]]
        at = [1500, 600]
        fy_kN = -40
        [[load]]
        from = [0, 600]
        to = [3000, 600]
        wx_kN_m = 2
        wy_kN_m = -5
        case = "wind"
        [cases]
        wind = 0.5
    """)
    s1, s2 = j.supports
    assert s1.points == ((0.0, 0.0), (150.0, 0.0)) and s1.fix == "xy"  # "xy" is the contract's default
    assert s2.points == ((3000.0, 0.0),) and s2.fix == "y"
    p, w = j.loads
    assert isinstance(p, PointLoad) and p.force_N == (0.0, -40000.0) and p.case == "main"
    assert isinstance(w, LineLoad) and w.intensity_N_per_mm == (2.0, -5.0) and w.case == "wind"
    assert j.case_weights == (("wind", 0.5),)
    assert p.source == "job.toml [[load]] #1"


# --- validation: one test each --------------------------------------------------------------------------------


@pytest.mark.parametrize("value", ["0", "-200", "nan", "inf"])
def test_E_must_be_positive(value):
    e = error("", BASE.replace("E_MPa = 11500", f"E_MPa = {value}"))
    assert e.where == "job.toml [material] E_MPa" and e.hint


@pytest.mark.parametrize("value", ["-0.1", "0.5", "0.7"])
def test_nu_outside_zero_to_half_is_rejected(value):
    e = error("", BASE.replace("nu = 0.3", f"nu = {value}"))
    assert e.where == "job.toml [material] nu" and "[0, 0.5)" in str(e)


def test_nu_zero_is_allowed():
    assert job(base=BASE.replace("nu = 0.3", "nu = 0")).material.nu == 0.0


@pytest.mark.parametrize("value", ["0", "-90"])
def test_thickness_must_be_positive(value):
    e = error("", BASE.replace("thickness = 90", f"thickness = {value}"))
    assert e.where == "job.toml [panel] thickness" and "greater than 0" in e.message


def test_unknown_key_names_table_and_nearest_valid_key():
    e = error("", BASE.replace("thickness = 90", "thicknes = 90"))
    assert e.message == 'unknown key "thicknes" in [panel]; did you mean "thickness"?'
    assert e.where == "job.toml [panel] thicknes"
    assert "thickness" in e.hint


def test_unknown_key_in_array_table_and_unknown_table():
    e = error("""
        [[load]]
        at = [0, 0]
        fy_KN = -3
    """)
    assert e.where == "job.toml [[load]] #1 fy_KN" and 'did you mean "fy_kN"?' in e.message
    e = error("[optimise]\nvolume_fraction = 0.5\n")
    assert 'did you mean "optimize"?' in e.message


def test_a_key_above_its_table_is_pointed_home():
    e = error("", base='units = "mm"\nthickness = 90\n')
    assert e.where == "job.toml thickness" and "[panel]" in e.hint


def test_single_bracket_support_table_gets_a_hint():
    e = error("[support]\nat = [0, 0]\n")
    assert "[[support]]" in e.message


@pytest.mark.parametrize("unit", ["mmm", "metres", "yd", ""])
def test_bad_units(unit):
    e = error("", BASE.replace('units = "mm"', f'units = "{unit}"'))
    assert e.where == "job.toml units" and "mm, cm, m, in, ft" in e.hint


def test_lengths_without_units_are_refused():
    e = error("", BASE.replace('units = "mm"', ""))
    assert e.where == "job.toml units" and "thickness" in e.message


def test_a_job_without_lengths_needs_no_units():
    j = parse_job('[material]\nE_MPa = 200000\nnu = 0.3\n[layers]\noutline = "P"\n')
    assert j.units == "mm" and not j.is_set("units")


@pytest.mark.parametrize(
    "text, where",
    [
        ('thickness = "90"', "[panel] thickness"),
        ("thickness = true", "[panel] thickness"),
        ('thickness = 90\nself_weight = "yes"', "[panel] self_weight"),
        ("[layers]\noutline = 3\n", "[layers] outline"),
        ("[voids]\nsides = 6.5\n", "[voids] sides"),
        ("[voids]\nbore_diameters = 20\n", "[voids] bore_diameters"),
        ('[voids]\nbore_diameters = [20, "x"]\n', "[voids] bore_diameters"),
        ("[optimize]\nmax_iterations = [1]\n", "[optimize] max_iterations"),
        ("[[support]]\nat = [1, 2, 3]\n", "[[support]] #1 at"),
        ("[[support]]\nat = 5\n", "[[support]] #1 at"),
        ('[cases]\nmain = "one"\n', "[cases] main"),
    ],
)
def test_bad_types(text, where):
    e = error(*in_panel(text))
    assert e.where == f"job.toml {where}"
    assert e.hint


@pytest.mark.parametrize(
    "text, where",
    [
        ("[optimize]\nvolume_fraction = 0\n", "[optimize] volume_fraction"),
        ("[optimize]\nvolume_fraction = 1.2\n", "[optimize] volume_fraction"),
        ('[optimize]\nsymmetry = "z"\n', "[optimize] symmetry"),
        ("[optimize]\npenalty = 0.5\n", "[optimize] penalty"),
        ("[optimize]\nvoid_density = 1\n", "[optimize] void_density"),
        ("[optimize]\nmax_iterations = 0\n", "[optimize] max_iterations"),
        ("[voids]\nsides = 2\n", "[voids] sides"),
        ("[voids]\nsides = 13\n", "[voids] sides"),
        ('[voids]\nfamily = "circle"\n', "[voids] family"),
        ("[voids]\nbore_diameters = []\n", "[voids] bore_diameters"),
        ("[voids]\nbore_diameters = [20, -5]\n", "[voids] bore_diameters"),
        ('[voids]\ncorner = "radius"\n', "[voids] corner_size"),
        ("[voids]\ncorner_size = 5\n", "[voids] corner_size"),
        ("[rules]\nmin_web = -1\n", "[rules] min_web"),
        ("[cases]\nmain = 0\n", "[cases] main"),
        ('[[support]]\nat = [0, 0]\nfix = "z"\n', "[[support]] #1 fix"),
        ('[layers]\noutline = "A"\nopenings = "a"\n', "[layers] openings"),
        ("thickness = 90\nself_weight = true", "[panel] self_weight"),  # no density given
    ],
)
def test_values_out_of_range(text, where):
    e = error(*in_panel(text))
    assert e.where == f"job.toml {where}" and e.hint


def test_valid_edges_of_ranges_are_accepted():
    j = job("""
        [optimize]
        volume_fraction = 1
        symmetry = "xy"
        [voids]
        sides = 12
        family = "mixed"
        corner = "chamfer"
        corner_size = 10
        snap = 0
        [rules]
        min_web = 0
    """)
    assert j.optimize.volume_fraction == 1.0 and j.voids.sides == 12 and j.voids.snap_mm == 0.0
    assert j.voids.corner_size_mm == 10.0 and j.rules.min_web_mm == 0.0


@pytest.mark.parametrize(
    "text, where, words",
    [
        ("[[support]]\nfix = \"xy\"\n", "[[support]] #1", "no position"),
        ("[[support]]\nat = [0, 0]\nfrom = [0, 0]\nto = [1, 0]\n", "[[support]] #1", "not both"),
        ("[[support]]\nfrom = [0, 0]\n", "[[support]] #1 to", "missing"),
        ("[[support]]\nfrom = [5, 5]\nto = [5, 5]\n", "[[support]] #1 to", "two distinct"),
        ("[[load]]\nfrom = [0, 0]\nto = [0, 0]\nwy_kN_m = 1\n", "[[load]] #1 to", "two distinct"),
    ],
)
def test_support_and_load_positions(text, where, words):
    e = error(text)
    assert e.where == f"job.toml {where}" and words in e.message


def test_missing_force_keys():
    e = error("""
        [[load]]
        at = [0, 0]
        [[load]]
        at = [1, 0]
        fy_kN = 2
    """)
    assert e.where == "job.toml [[load]] #1" and "missing force keys" in e.message
    e = error("""
        [[load]]
        at = [1, 0]
        fy_kN = 2
        [[load]]
        from = [0, 0]
        to = [1, 0]
        case = "main"
    """)
    assert e.where == "job.toml [[load]] #2" and "wx_kN_m and/or wy_kN_m" in e.message


def test_force_keys_must_match_the_load_kind():
    e = error("[[load]]\nat = [0, 0]\nwy_kN_m = -5\n")
    assert e.where == "job.toml [[load]] #1 wy_kN_m" and "point load" in e.message
    e = error("[[load]]\nfrom = [0, 0]\nto = [1, 0]\nfy_kN = -5\n")
    assert e.where == "job.toml [[load]] #1 fy_kN" and "line load" in e.message


def test_the_message_names_the_load_and_its_key():
    e = error("""
        [[load]]
        at = [0, 0]
        fy_kN = -1
        [[load]]
        at = [1, 0]
        fy_kN = "ten"
    """)
    assert e.where == "job.toml [[load]] #2 fy_kN"
    assert str(e).startswith("job.toml [[load]] #2 fy_kN: ")


def test_zero_load_is_a_warning_not_an_error():
    j = job("[[load]]\nat = [0, 0]\nfx_kN = 0\n")
    assert len(j.warnings) == 1 and "zero" in j.warnings[0]


def test_invalid_toml_reports_line_and_column():
    e = error("[panel\nthickness = 3\n", base="")
    assert e.where == "job.toml line 1, column 7"
    assert "not valid TOML" in e.message
    e = error('units = "mm"\nthickness 90\n', base="")
    assert re.fullmatch(r"job\.toml line 2, column \d+", e.where)


# --- units ----------------------------------------------------------------------------------------------------

# One panel written in five units. 304.8 mm = 1 ft = 12 in exactly (1959 agreement); 0.3048 m; 30.48 cm.
# Every length below is a whole multiple of 304.8 mm so each file can state it exactly.
UNIT_JOBS = {
    "mm": dict(t=304.8, e=76.2, p=(3048, 609.6), r=152.4, b=(25.4, 50.8)),
    "cm": dict(t=30.48, e=7.62, p=(304.8, 60.96), r=15.24, b=(2.54, 5.08)),
    "m": dict(t=0.3048, e=0.0762, p=(3.048, 0.6096), r=0.1524, b=(0.0254, 0.0508)),
    "in": dict(t=12, e=3, p=(120, 24), r=6, b=(1, 2)),
    "ft": dict(t=1, e=0.25, p=(10, 2), r=0.5, b=(1 / 12, 1 / 6)),
}


def unit_job(unit: str) -> Job:
    v = UNIT_JOBS[unit]
    return parse_job(f"""
units = "{unit}"
[panel]
thickness = {v['t']!r}
element_size = {v['e']!r}
[[support]]
from = [0, 0]
to = [{v['p'][0]!r}, 0]
[[load]]
at = [{v['p'][0]!r}, {v['p'][1]!r}]
fy_kN = -12.5
[[load]]
from = [0, {v['p'][1]!r}]
to = [{v['p'][0]!r}, {v['p'][1]!r}]
wy_kN_m = -3
[optimize]
filter_radius = {v['r']!r}
[voids]
bore_diameters = [{v['b'][0]!r}, {v['b'][1]!r}]
snap = {v['e']!r}
[rules]
min_web = {v['r']!r}
edge_cover = {v['e']!r}
""")


@pytest.mark.parametrize("unit", ["mm", "cm", "m", "in", "ft"])
def test_units_give_the_same_mm_and_N(unit):
    j = unit_job(unit)
    mm = pytest.approx
    # 1 ft = 304.8 mm, 1 in = 25.4 mm exactly (international yard and pound agreement, 1959).
    assert j.panel.thickness_mm == mm(304.8, rel=1e-12)
    assert j.panel.element_size_mm == mm(76.2, rel=1e-12)
    assert j.supports[0].points[1] == mm((3048.0, 0.0), rel=1e-12)
    assert j.loads[0].at == mm((3048.0, 609.6), rel=1e-12)
    # kN stays kN and kN/m stays kN/m whatever the length unit: 12.5 kN = 12500 N; 3 kN/m = 3 N/mm (SI).
    assert j.loads[0].force_N == (0.0, -12500.0)
    assert j.loads[1].intensity_N_per_mm == (0.0, -3.0)
    assert j.optimize.filter_radius_mm == mm(152.4, rel=1e-12)
    assert j.voids.bore_diameters_mm == mm((25.4, 50.8), rel=1e-12)
    assert j.voids.snap_mm == mm(76.2, rel=1e-12)
    assert j.rules.min_web_mm == mm(152.4, rel=1e-12) and j.rules.edge_cover_mm == mm(76.2, rel=1e-12)


def test_units_are_case_insensitive():
    assert job(base=BASE.replace('"mm"', '"FT"')).panel.thickness_mm == pytest.approx(90 * 304.8)  # 1959 def.


# --- the template ---------------------------------------------------------------------------------------------


def test_template_parses_and_matches_the_contract_example():
    j = parse_job(template_text(), source="job_template.toml")
    # The values below are those of the CONTRACT.md example job file.
    assert j.units == "mm" and j.panel.thickness_mm == 90.0 and j.panel.element_size_mm == 10.0
    assert j.material.E_MPa == 11500.0 and j.material.density_kg_m3 == 420.0
    assert j.loads[0].force_N == (0.0, -40000.0) and j.loads[1].intensity_N_per_mm == (0.0, -5.0)
    assert j.voids.bore_diameters_mm == (20, 25, 32, 40, 50, 65, 80, 100, 125, 150)
    assert j.warnings == ()


def test_template_documents_every_key():
    text = template_text()
    for table, keys in TABLE_KEYS.items():
        header = f"[[{table}]]" if table in ("support", "load", "moving_load") else f"[{table}]"
        assert header in text, header
        for key in keys:
            assert re.search(rf"^(# )?{key} = ", text, re.M), key
    for key in TOP_KEYS:
        assert key in text
    assert "qualified engineer" in text
