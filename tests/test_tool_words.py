"""The schedule names the tool in the trade of the panel's profile: a timber panel's voids are routed and bored, a
steel plate's cut, a precast panel's cast round formers; a job without a profile gets plain words.

The words are data in each profile file ([tool_words]); what is checked here is that each profile's voids are
scheduled with its own words, that no timber or steel schedule says "former" (a casting word), and that the
words come from the file and nowhere else. tests/test_schedule_drawn.py checks the same on whole runs.
"""

from __future__ import annotations

import math
import shutil

import numpy as np
import pytest
from shapely.geometry import LineString, Point, Polygon

from toolkit.errors import LacunaError
from toolkit.voids.settings import VoidOptions
from toolkit.model import Material, Panel, Rules
from toolkit.rules.profiles import PROFILE_DIR, TOOL_FAMILIES, list_profiles, load_profile, read_profile_file, rules_for
from toolkit.voids.layout import rationalise

PANEL = Panel(width_mm=2000.0, height_mm=600.0, thickness_mm=40.0, material=Material(E_MPa=11500, nu=0.3))
# One freeform void a family: each is already what that family makes, so every profile gives one void of it.
FREEFORM = {
    "polygon": Polygon([(600 + 110 * math.cos(a), 300 + 110 * math.sin(a)) for a in np.radians(range(0, 360, 60))]),
    "slot": LineString([(900, 300), (1100, 300)]).buffer(60, quad_segs=32),
    "bore": Point(1500, 300).buffer(70, quad_segs=32),
}
# Words of the trade (common practice, no source): timber is routed and bored, steel plate cut, concrete cast
# round formers; "former" is a casting word only.
EXPECTED = {
    "timber-bored": ("routed", "routed slot", "hole saw"),
    "steel-cut": ("cut", "cut slot", "cut hole"),
    "precast-formed": ("former", "slot former", "pipe former"),
}


def _tools(rules: Rules) -> dict[str, list[str]]:
    out = {}
    for family, shape in FREEFORM.items():
        res = rationalise(PANEL, [shape], VoidOptions(family=family, sides=6), rules)
        assert res.voids and res.violations == (), (rules.profile, family)
        out[family] = [v.tool for v in res.voids]
    return out


def test_every_installed_profile_gives_its_tool_words():
    for name in list_profiles():
        words = load_profile(name).tool_words
        assert len(words) == len(TOOL_FAMILIES) and all(w.strip() for w in words), name
        assert rules_for(name).tool_words == words


@pytest.mark.parametrize("name", sorted(EXPECTED))
def test_each_profile_schedules_its_voids_in_its_own_words(name):
    polygon, slot, bore = EXPECTED[name]
    tools = _tools(rules_for(name))
    assert all(f"6-gon {polygon} " in t for t in tools["polygon"]), tools
    assert all(t.startswith(f"{slot} ") for t in tools["slot"]), tools
    assert all(t.startswith(f"{bore} ") for t in tools["bore"]), tools
    if name != "precast-formed":
        assert not any("former" in t for ts in tools.values() for t in ts), tools


def test_a_job_without_a_profile_gets_plain_words():
    rules = rules_for(None)
    assert rules.tool_words == Rules().tool_words == ("cut", "slot", "bore")
    tools = _tools(rules)
    assert tools["bore"][0].startswith("bore ") and tools["slot"][0].startswith("slot ")
    assert not any("former" in t for ts in tools.values() for t in ts)


def _copy(tmp_path, name="timber-bored"):
    target = tmp_path / f"{name}.toml"
    shutil.copy(PROFILE_DIR / f"{name}.toml", target)
    return target


def test_the_words_come_from_the_profile_file(tmp_path):
    path = _copy(tmp_path)
    path.write_text(path.read_text().replace('bore = "hole saw"', 'bore = "core drill"'))
    tools = _tools(rules_for("timber-bored", directory=tmp_path))
    assert tools["bore"][0].startswith("core drill ")


def test_a_profile_without_tool_words_gets_the_plain_ones(tmp_path):
    path = _copy(tmp_path)
    text = path.read_text()
    path.write_text(text[:text.index("[tool_words]")])
    assert read_profile_file(path).tool_words == Rules().tool_words


@pytest.mark.parametrize("edit, fragment", [
    (lambda s: s.replace('slot = "routed slot"\n', ""), "no word for the tool that makes a slot"),
    (lambda s: s.replace('polygon = "routed"', 'polygon = ""'), "no word for the tool that makes a polygon"),
    (lambda s: s.replace('bore = "hole saw"', 'bores = "hole saw"'), "unknown key 'bores'"),
])
def test_bad_tool_words_are_reported_with_the_file(tmp_path, edit, fragment):
    path = _copy(tmp_path)
    path.write_text(edit(path.read_text()))
    with pytest.raises(LacunaError) as e:
        read_profile_file(path)
    assert fragment in str(e.value) and "[tool_words]" in e.value.where
