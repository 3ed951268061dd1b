"""One scenario of our own per fabrication profile, the whole job in memory: what is saved, what it costs.

The figures are reported (run with -s to see them) and held to what must be true whatever the tuning:
- every rule holds on the final geometry (the proof is empty);
- removing material never lowers the compliance below the solid panel's (energy theorem of linear elasticity,
  common knowledge, no source);
- where the voids to make remove at least as much material as the optimiser's freeform layout did, they are no
  stiffer than it (removing the same material in worse places cannot make a panel stiffer). Both are analysed
  the same way for this comparison, openings cut exactly from the same grid, so the only error left is the
  solver's (1e-9 relative allowed);
- the voids to make are never softer than the freeform layout (a requirement of ours, issue 9, no outside
  source): the fitting holds its own analyses to the freeform layout's compliance; those give emptied elements
  1e-6 of their stiffness and keep the solid panel's loads, so 1e-3 relative is allowed against the full
  re-analysis;
- the precast n-gon scenario keeps at least 80 % of the freeform saving (issue 9's target for that family and
  profile, a requirement of ours, no outside source; measured 93 %);
- the rules' ceiling (toolkit/voids/ceiling.py) bounds the layout made: each void grown by half the web its own
  size asks overlaps no other grown void, and the voids are at most the ceiling's share of the grown voids' union
  (grown areas by shapely's buffer, not by the ceiling's formulas).
"""

from __future__ import annotations

import pytest

from toolkit.jobfile import parse_job
from toolkit.model import LineLoad, Material, Panel, PointLoad, Region, Support
from toolkit.pipeline import optimize_panel
import shapely
from shapely.geometry import Point, box

SCENARIOS = {
    # A glulam purlin over a cart shed, bored for cable runs (timber-bored).
    "timber-bored": dict(
        panel=Panel(width_mm=3600, height_mm=450, thickness_mm=115, element_size_mm=30,
                    material=Material(E_MPa=11500, nu=0.3, density_kg_m3=420),
                    supports=(Support(((0, 0), (120, 0)), "xy"), Support(((3480, 0), (3600, 0)), "y")),
                    loads=(LineLoad((0, 450), (3600, 450), (0.0, -4.0)),)),
        family="bore"),
    # A precast spandrel panel over a shop front, with a drain opening (precast-formed).
    "precast-formed": dict(
        panel=Panel(width_mm=6000, height_mm=1500, thickness_mm=200, element_size_mm=60,
                    material=Material(E_MPa=30000, nu=0.2, density_kg_m3=2400),
                    openings=(Region(Point(4500, 750).buffer(100), layer="OPENING"),),
                    supports=(Support(((0, 0), (300, 0)), "xy"), Support(((5700, 0), (6000, 0)), "y")),
                    loads=(LineLoad((0, 1500), (6000, 1500), (0.0, -25.0)),)),
        family="polygon"),
    # A steel gusset plate carrying a hanger load to two bolted edges (steel-cut).
    "steel-cut": dict(
        panel=Panel(width_mm=900, height_mm=600, thickness_mm=15, element_size_mm=15,
                    material=Material(E_MPa=210000, nu=0.3, density_kg_m3=7850),
                    keep=(Region(box(390, 0, 510, 90), layer="KEEP"),),
                    supports=(Support(((0, 100), (0, 500)), "xy"), Support(((900, 100), (900, 500)), "xy")),
                    loads=(PointLoad((450, 0), (0.0, -60000.0)),)),
        family="slot"),
}


def _job(profile: str, family: str):
    return parse_job(f'[optimize]\nvolume_fraction = 0.5\nmax_iterations = 80\n[voids]\nfamily = "{family}"\n'
                     f'[rules]\nprofile = "{profile}"\n')


@pytest.mark.parametrize("profile", sorted(SCENARIOS))
def test_profile_scenario(profile):
    scenario = SCENARIOS[profile]
    run = optimize_panel(scenario["panel"], _job(profile, scenario["family"]))
    c_solid, c_made = run.solid.compliance_Nmm, run.final.compliance_Nmm
    c_free, removed_free = run.freeform_analysis.compliance_Nmm, run.freeform_removed_percent
    print(f"\n{profile}: {len(run.voids)} voids ({scenario['family']}), removed {run.mass_removed_percent:.1f} % "
          f"(freeform {removed_free:.1f} %); compliance solid {c_solid:.6g}, freeform {c_free:.6g} "
          f"(optimiser's own {run.beso.compliance_final_Nmm:.6g}), "
          f"to make {c_made:.6g} N mm")
    assert run.rationalised.violations == ()
    assert all(v.family == scenario["family"] for v in run.voids)
    assert c_made >= c_solid * (1 - 1e-12)
    if run.mass_removed_percent >= removed_free:
        assert c_made >= c_free * (1 - 1e-9)
    assert c_made <= c_free * (1 + 1e-3)
    if profile == "precast-formed":
        assert run.capture_percent >= 80.0
    if run.ceiling is not None and run.voids:
        shapes = [v.shape for v in run.voids]
        rules = run.rules
        webs = [max(rules.min_web_mm, rules.web_ratio * 2.0 * shapely.minimum_bounding_radius(g)) for g in shapes]
        grown = [g.buffer(w / 2.0, quad_segs=64) for g, w in zip(shapes, webs)]
        ground = shapely.union_all(grown).area
        print(f"  the rules' ceiling {100 * run.ceiling.share:.1f} %: the voids are "
              f"{100 * sum(g.area for g in shapes) / ground:.1f} % of the ground they stand on")
        assert ground >= sum(g.area for g in grown) * (1 - 1e-6)  # no two grown voids overlap
        assert sum(g.area for g in shapes) <= run.ceiling.share * ground
