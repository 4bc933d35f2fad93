"""Beam-theory estimates ([[beam]]) next to FE values, and stress linearization through the pipeline."""
import json

import numpy as np
import pytest
from scipy import integrate

import elastofe
from elastofe.errors import CaseError
from elastofe.handcalc import beams as hb
from elastofe.handcalc.solids import thick_cylinder
from tests.conftest import ring_case, write_case, write_step

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh

E, NU = 200000.0, 0.3


@pytest.fixture(scope="module")
def geo(tmp_path_factory):
    d = tmp_path_factory.mktemp("estgeo")
    out = {}

    # Tapered cantilever: length 100, width 10 (z from 0 to 10), depth 20 at the root -> 10 at the tip.
    def taper(occ):
        p = [occ.addPoint(0, -10, 0), occ.addPoint(100, -5, 0), occ.addPoint(100, 5, 0), occ.addPoint(0, 10, 0)]
        lines = [occ.addLine(p[i], p[(i + 1) % 4]) for i in range(4)]
        face = occ.addPlaneSurface([occ.addCurveLoop(lines)])
        occ.extrude([(2, face)], 0, 0, 10)
    out["taper"] = write_step(d / "taper.step", taper)

    # Bar 100 x 10 x 10 in two halves (y < 0 and y > 0) so that its tip face is two surfaces: opposite
    # axial forces on them make a pure couple.
    def halves(occ):
        lo = occ.addBox(0, -5, -5, 100, 5, 10)
        hi = occ.addBox(0, 0, -5, 100, 5, 10)
        occ.fragment([(3, lo)], [(3, hi)])
    out["halves"] = write_step(d / "halves.step", halves)
    return out


def taper_case(path, geo, size=3.0, extra=""):
    return write_case(path, f"""
        [geometry]
        file = "{geo['taper']}"
        [material]
        E = {E}
        nu = {NU}
        [mesh]
        size = {size}
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        tip = {{ plane = {{ point = [100, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        [[load]]
        region = "tip"
        force = [0, -1000, 0]
        [[point]]
        name = "tip"
        at = [100, 0, 5]
        [[point]]
        name = "quarter-top"
        at = [25, 8.75, 5]
        [[line]]
        name = "mid"
        start = [50, -7.5, 5]
        end = [50, 7.5, 5]
        samples = 31
        [[beam]]
        name = "taper"
        held_end = [0, 0, 5]
        load_point = [100, 0, 5]
        sections = [{{ at = 0, rectangle = {{ width = 10, depth = 20 }} }},
                    {{ at = 100, rectangle = {{ width = 10, depth = 10 }} }}]
        load = "tip"
        points = ["quarter-top"]
        lines = ["mid"]
        {extra}
        """)


@pytest.fixture(scope="module")
def taper_run(geo, tmp_path_factory):
    d = tmp_path_factory.mktemp("taper")
    return elastofe.run(taper_case(d / "taper.toml", geo), out=d / "out"), d / "out"


def test_tapered_cantilever_fe_inside_constant_section_bounds_and_near_unit_load_integral(taper_run):
    res, out = taper_run
    est = res.estimates["taper"]["load_point_deflection"]
    # The unit-load integral for a linear depth taper against the handcalc function alone, bending part
    # (Timoshenko & Gere, unit-load method): same integrand, same value.
    ref = hb.cantilever_tapered_rectangle(100, 10, 20, 10, -1000, E)
    assert est["bending"] == pytest.approx(ref.deflection, rel=1e-9)
    fe = est["fe"]
    assert est["fe_source"] == "probe at the load point"
    lo, hi = sorted((est["stiff_bound"], est["soft_bound"]))
    # Common practice: a varying section deflects between the constant sections at its largest and
    # smallest section.
    assert lo < fe < hi and est["fe_within_bounds"]
    # Within 3 % of the unit-load integral with the Timoshenko shear term (Cowper's k); the clamped
    # root's restraint of the Poisson contraction and the slowly-varying-section idealisation account for
    # the rest (common practice; measured here: about -1 %).
    assert fe == pytest.approx(est["estimate"], rel=0.03)
    doc = json.loads((out / "summary.json").read_text())
    assert doc["estimates"]["taper"]["load_point_deflection"]["fe"] == pytest.approx(fe, rel=1e-12)


def test_tapered_cantilever_line_follows_flexure_formula(taper_run):
    res, _ = taper_run
    ln = res.estimates["taper"]["lines"]["mid"]
    # At x = 50: depth 15, I = 10 * 15^3 / 12, M = 1000 * 50; extreme fibre M c / I (flexure formula,
    # common practice); the load pulls -y, so the top (+y) fibre is in tension.
    I = 10 * 15 ** 3 / 12
    smax = 1000 * 50 * 7.5 / I
    assert ln["estimate_extremes"][1] == pytest.approx(smax, rel=1e-9)
    assert ln["estimate_extremes"][0] == pytest.approx(-smax, rel=1e-9)
    assert ln["fe_extremes"][1] == pytest.approx(smax, rel=0.02)
    assert ln["fe_departure_from_linear"] < 0.02
    assert ln["fe_departure_from_estimate"] < 0.02
    pt = res.estimates["taper"]["points"]["quarter-top"]
    # Point at x = 25, y = 8.75 (the top fibre there): sigma = M y / I with depth 17.5.
    I25 = 10 * 17.5 ** 3 / 12
    assert pt["bending_stress"]["estimate"] == pytest.approx(1000 * 75 * 8.75 / I25, rel=1e-9)
    assert pt["bending_stress"]["fe"] == pytest.approx(pt["bending_stress"]["estimate"], rel=0.02)


def test_deflection_at_station_reduces_to_constant_section_formula():
    # Constant section: P x^2 (3a - x) / (6 E I) for x <= a and P a^2 (3x - a) / (6 E I) beyond
    # (Roark's Formulas, 7th ed., Table 8.1 case 1a, case number from memory).
    P, I, a = 250.0, 1234.0, 80.0
    for x in (0.0, 20.0, 80.0, 95.0):
        db, ds = hb.cantilever_variable_section_deflection_at(lambda t: np.full_like(t, I), P, E, a, x)
        ref = P * x ** 2 * (3 * a - x) / (6 * E * I) if x <= a else P * a ** 2 * (3 * x - a) / (6 * E * I)
        assert db == pytest.approx(ref, rel=1e-10, abs=1e-15)
        assert ds == 0.0
    # Shear part: P min(a, x) / (k G A) for a constant k G A (Timoshenko beam, common practice).
    _, ds = hb.cantilever_variable_section_deflection_at(([0, 100], [I, I]), P, E, a, 95.0, kGA=([0, 100], [5e6, 5e6]))
    assert ds == pytest.approx(P * a / 5e6, rel=1e-12)


def test_beam_section_errors_name_the_key(geo, tmp_path):
    ok = elastofe.load_case(taper_case(tmp_path / "a.toml", geo))
    assert ok.beams[0].sections[1].dims == (10.0, 10.0) and ok.beams[0].load == "tip"
    bad = taper_case(tmp_path / "b.toml", geo).read_text().replace('points = ["quarter-top"]', 'points = ["nope"]')
    (tmp_path / "b.toml").write_text(bad)
    with pytest.raises(CaseError) as e:
        elastofe.load_case(tmp_path / "b.toml")
    assert e.value.key == "beam[1].points[1]"
    bad = taper_case(tmp_path / "c.toml", geo).read_text().replace("at = 100, rectangle", "at = 90, rectangle")
    (tmp_path / "c.toml").write_text(bad)
    with pytest.raises(CaseError) as e:
        elastofe.load_case(tmp_path / "c.toml")
    assert e.value.key == "beam[1].sections"
    bad = taper_case(tmp_path / "d.toml", geo).read_text().replace('load = "tip"', 'load = "root"')
    (tmp_path / "d.toml").write_text(bad)
    with pytest.raises(CaseError) as e:
        elastofe.load_case(tmp_path / "d.toml")
    assert e.value.key == "beam[1].load" and "'tip' (load[1])" in e.value.expected


def test_linearization_of_pure_bending_line(geo, tmp_path):
    F = 500.0
    case = write_case(tmp_path / "couple.toml", f"""
        [geometry]
        file = "{geo['halves']}"
        [material]
        E = {E}
        nu = {NU}
        [mesh]
        size = 2.5
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        tip_top = {{ at = [100, 2.5, 0] }}
        tip_bottom = {{ at = [100, -2.5, 0] }}
        [[support]]
        region = "root"
        [[load]]
        region = "tip_top"
        force = [{F}, 0, 0]
        [[load]]
        region = "tip_bottom"
        force = [{-F}, 0, 0]
        [[line]]
        name = "across"
        start = [50, -5, 0]
        end = [50, 5, 0]
        samples = 41
        """)
    res = elastofe.run(case, out=tmp_path / "out")
    doc = json.loads((tmp_path / "out" / "summary.json").read_text())
    lin = doc["linearized"]["across"]
    # The two half-face forces make a couple M = F h / 2 (each acts at y = +-h/4); at mid-span the bar is
    # in pure bending (Saint-Venant's principle): sigma_xx = M y / I, membrane 0, bending M c / I at the
    # fibres (flexure formula; linearization per ASME VIII-2 Part 5, from memory).
    h, b = 10.0, 10.0
    M, I = F * h / 2, b * h ** 3 / 12
    smax = M * (h / 2) / I
    assert abs(lin["membrane"]["xx"]) < 0.01 * smax
    assert lin["bending"]["end"]["xx"] == pytest.approx(smax, rel=0.02)
    assert lin["bending"]["start"]["xx"] == pytest.approx(-smax, rel=0.02)
    assert abs(lin["peak"]["end"]["xx"]) < 0.02 * smax
    assert lin["file"] == "line-across-linearized.json"
    comp = json.loads((tmp_path / "out" / lin["file"]).read_text())
    assert comp["bending"]["end"]["xx"] == pytest.approx(lin["bending"]["end"]["xx"], rel=1e-12)
    assert "caution" in comp and comp["line_file"] == "line-across.csv"
    assert res.linearized["across"][0].thickness == pytest.approx(10.0, rel=1e-12)


def test_linearization_across_thick_cylinder_wall_against_lame(parts, tmp_path):
    a, b, p = 10.0, 20.0, 10.0
    c45 = 1 / np.sqrt(2)
    assert a == 10.0  # the bore radius of the shared quarter-ring part
    case = ring_case(tmp_path / "ring.toml", parts["ring"], E=E, nu=NU, pressure=p, size=2.0, extra=f"""
        [[line]]
        name = "wall"
        start = [{a * c45}, {a * c45}, 2.5]
        end = [{b * c45}, {b * c45}, 2.5]
        samples = 41
        """)
    res = elastofe.solve_case(elastofe.load_case(case))
    lin, info = res.linearized["wall"]
    t = b - a
    # Lamé plane strain (Timoshenko & Goodier, thick cylinder; handcalc.solids.thick_cylinder), split
    # by the linearization integrals over the wall (ASME VIII-2 Part 5, from memory).
    def part(comp):
        def f(r):
            return getattr(thick_cylinder(r, a, b, p_i=p, nu=NU), comp)

        mem = integrate.quad(f, a, b)[0] / t
        bend = 6 / t ** 2 * integrate.quad(lambda r: f(r) * (t / 2 - (r - a)), a, b)[0]
        return mem, bend

    def hoop(v):   # at 45 degrees the hoop direction is (-1, 1)/sqrt(2)
        return 0.5 * (v[0] + v[1]) - v[3]

    def radial(v):
        return 0.5 * (v[0] + v[1]) + v[3]

    mh, bh = part("sigma_theta")
    mr, br = part("sigma_r")
    assert hoop(lin.membrane) == pytest.approx(mh, rel=0.01)
    assert hoop(lin.bending_start) == pytest.approx(bh, rel=0.03)
    assert radial(lin.membrane) == pytest.approx(mr, rel=0.03)
    assert radial(lin.bending_start) == pytest.approx(br, rel=0.03)
    mz, _ = part("sigma_z")
    assert lin.membrane[2] == pytest.approx(mz, rel=0.02)
    assert info["samples"] == 41
