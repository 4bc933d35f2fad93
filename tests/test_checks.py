"""Plausibility checks: element shape measures against hand-computed values, each check's verdict
on runs built to pass, warn or fail it, and the checks in summary.json and the CLI output."""
from __future__ import annotations

import json
from types import SimpleNamespace

import numpy as np
import pytest

from elastofe import load_case, parse_case, solve_case
from elastofe.cli import main
from elastofe.fem.elements import Tet10
from elastofe.post import checks as ck


def _case(units="mm-N", E=200000.0, nu=0.3, density=None, order=2, fy=None):
    doc = {"units": units, "geometry": {"file": "part.step"}, "material": {"E": E, "nu": nu},
           "mesh": {"order": order}, "regions": {"a": {"surfaces": [1]}}, "support": [{"region": "a"}]}
    if density is not None:
        doc["material"]["density"] = density
    if fy is not None:
        doc["material"]["yield_strength"] = fy
    return parse_case(doc)


CORNER = np.array([[0.0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]])


def test_aspect_ratio_of_regular_and_corner_tetrahedra():
    # Regular tetrahedron: 1 by construction of the measure (inradius a/(2 sqrt 6)).
    reg = np.array([[1.0, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1]])
    ar = ck.aspect_ratio(reg, np.array([[0, 1, 2, 3]]))
    assert ar[0] == pytest.approx(1.0, rel=1e-12)
    # Corner tetrahedron: longest edge sqrt 2, inradius 1/(3 + sqrt 3) (hand computation:
    # r = 3V/A with V = 1/6, A = 3/2 + sqrt(3)/2), so AR = (sqrt 3 + 1)/2.
    ar = ck.aspect_ratio(CORNER, np.array([[0, 1, 2, 3]]))
    assert ar[0] == pytest.approx((np.sqrt(3) + 1) / 2, rel=1e-12)


def test_jacobian_ratio_of_straight_and_curved_tet10():
    mid = 0.5 * (CORNER[Tet10.edges[:, 0]] + CORNER[Tet10.edges[:, 1]])
    pts = np.vstack([CORNER, mid])
    cells = np.arange(10)[None]
    assert ck.jacobian_ratio(pts, cells)[0] == pytest.approx(1.0, abs=1e-12)
    # Edge node of edge (0, 1) moved by d along the edge: x = xi + 4 d xi (1 - xi - eta - zeta),
    # det J = 1 + 4 d (1 - 2 xi - eta - zeta), max 1 + 4d at node 0 and min 1 - 4d at node 1
    # (hand computation from the TET10 shape function of node 4).
    d = 0.1
    pts2 = pts.copy()
    pts2[4, 0] += d
    assert ck.jacobian_ratio(pts2, cells)[0] == pytest.approx((1 - 4 * d) / (1 + 4 * d), rel=1e-12)


def test_element_quality_counts_a_sliver():
    good = [CORNER + [2.0 * i, 0, 0] for i in range(30)]
    sliver = np.array([[0.0, 0, 5], [1, 0, 5], [0, 1, 5], [0.3, 0.3, 5.01]])
    pts = np.vstack(good + [sliver])
    cells = np.arange(pts.shape[0]).reshape(-1, 4)
    res = SimpleNamespace(mesh=SimpleNamespace(points=pts, cells=cells))
    c = ck.check_element_quality(res)
    assert c.details["poor_aspect"] == 1 and c.details["poor"] == 1
    assert c.status == "warn"          # 1 of 31 = 3.2 %, under the 5 % share that fails
    cells2 = np.vstack([cells, np.tile(cells[-1], (3, 1))])  # 4 slivers of 34: 12 %
    c2 = ck.check_element_quality(SimpleNamespace(mesh=SimpleNamespace(points=pts, cells=cells2)))
    assert c2.status == "fail" and c2.details["poor"] == 4


@pytest.mark.parametrize("kw, status, words", [
    (dict(E="200 GPa", density="7850 kg/m^3"), "pass", "range of engineering"),
    (dict(units="in-lbf", E="29e6 psi", density="0.284 lb/inch^3"), "pass", "range of engineering"),
    (dict(E=200.0, density="7850 kg/m^3"), "warn", "GPa"),           # GPa value written in an MPa case
    (dict(E=200.0), "warn", "polymers"),
    (dict(E=5.0e6), "fail", "far too stiff"),                        # kPa value in an MPa case (2e11
                                                                     # Pa in MPa is refused at load)
    (dict(units="m-N", E=200.0), "fail", "far too soft"),            # GPa value in a Pa case
    (dict(E="200 GPa", density=7.85e-7), "fail", "density"),         # 100 times steel's (kg/m^3 as
                                                                     # t/mm^3 is refused at load)
])
def test_units_plausibility(kw, status, words):
    c = ck.check_units(SimpleNamespace(case=_case(**kw)))
    assert c.status == status, c.why
    assert words in c.why


def test_units_check_gives_e_in_the_case_unit_too():
    """An in-lbf case reads its modulus in psi first (29e6 psi = 199.9 GPa: 6894.757 Pa per psi, by
    definition of the units); SI cases keep the plain GPa text."""
    c = ck.check_units(SimpleNamespace(case=_case(units="in-lbf", E="29e6 psi", density="0.284 lb/inch^3")))
    assert c.why.startswith("E = 2.9e+07 psi (199.9 GPa)"), c.why
    c = ck.check_units(SimpleNamespace(case=_case(E="200 GPa", density="7850 kg/m^3")))
    assert c.why.startswith("E = 200 GPa and density 7850 kg/m^3"), c.why


@pytest.mark.parametrize("order, nu, status", [(1, 0.3, "pass"), (1, 0.46, "warn"), (1, 0.495, "fail"),
                                               (2, 0.495, "pass"), (2, 0.4995, "warn")])
def test_incompressibility(order, nu, status):
    from dataclasses import replace

    # The loader itself refuses nu >= 0.49 with order 1 (exit 2); the check is built on a Result,
    # so its own verdict is tested on a case edited after loading.
    case = _case(nu=0.3, order=order)
    case = replace(case, material=replace(case.material, nu=nu))
    res = SimpleNamespace(case=case, mesh=SimpleNamespace(cells=np.zeros((1, 4 if order == 1 else 10), int)))
    assert ck.check_incompressibility(res).status == status


@pytest.mark.parametrize("err, status", [(1e-13, "pass"), (1e-5, "warn"), (1e-2, "fail")])
def test_equilibrium_levels(err, status):
    assert ck.check_equilibrium(SimpleNamespace(equilibrium_error=err)).status == status


def test_equilibrium_takes_the_worst_load_case():
    """Each load case is its own right-hand side: an iterative solve can balance the first to round-off
    and leave another out of equilibrium. The check judges the worst and names it (the levels 1e-6 and
    1e-3 of docs/checks.md)."""
    cases = {"a": SimpleNamespace(equilibrium_error=1e-13), "b": SimpleNamespace(equilibrium_error=2e-2)}
    c = ck.check_equilibrium(SimpleNamespace(equilibrium_error=1e-13, load_cases=cases))
    assert c.status == "fail" and c.value == pytest.approx(2e-2) and "in 'b'" in c.why


@pytest.fixture(scope="module")
def cantilever(parts, tmp_path_factory):
    """The 100 x 10 x 10 bar clamped at x = 0 under a 100 N tip shear (mesh size 5, TET10)."""
    from tests.conftest import cantilever_text, write_case

    path = write_case(tmp_path_factory.mktemp("chk") / "bar.toml", cantilever_text(
        parts["bar"], size=5.0, title="cantilever for checks", material="yield_strength = 40.0", tip_point=False,
        line_samples=0))
    return path, solve_case(load_case(path))


def test_checks_on_a_cantilever(cantilever):
    _, res = cantilever
    found = {c.name: c for c in ck.run_checks(res)}
    assert list(found) == [f.__name__[len("check_"):] for f in ck.applicable_checks(res.case)]
    assert "frequency" not in found and "buckling" not in found  # no [modes] or [buckling] asked for
    assert found["equilibrium"].status == "pass"
    # Tip deflection P L^3 / (3 E I) = 0.2 mm (Euler-Bernoulli, any strength-of-materials text)
    # against the 100.5 mm part size: 0.2 %, far under the 2 % limit.
    assert found["small_displacement"].value == pytest.approx(0.2 / np.sqrt(100 ** 2 + 200), rel=0.1)
    assert found["small_displacement"].status == "pass"
    # Bending stress M c / I = 100 * 100 * 5 / (10^4 / 12) = 60 MPa at the root and 48 MPa at
    # x = 20 (flexure formula): above the 40 MPa yield strength well away from the support.
    assert found["yield"].status == "fail"
    assert found["yield"].details["max_von_mises_away_from_supports_and_loads"] > 40.0
    # The clamped root's corners carry the peak: the check must point at the support.
    assert found["peak_location"].status == "warn" and found["peak_location"].details["region"] == "root"
    assert found["element_quality"].status == "pass"
    assert found["incompressibility"].status == "pass"
    jump = ck.stress_jump_at(res, int(np.argmax(res.von_mises)))
    assert jump["element_min"] <= jump["averaged"] <= jump["element_max"]
    if jump["elements"] >= 2:
        assert found["stress_jump"].value == pytest.approx(jump["spread"])
    else:
        assert found["stress_jump"].status == "skip"
    # Ten times the displacement is still linear algebra, but 2 % of the part size no longer holds.
    big = SimpleNamespace(case=res.case, mesh=res.mesh, u=res.u * 2000.0)
    assert ck.check_small_displacement(big).status == "fail"


def test_yield_pass_when_stress_is_low(cantilever):
    from dataclasses import replace

    _, res = cantilever
    strong = replace(res.case, material=replace(res.case.material, yield_strength=1000.0))
    c = ck.check_yield(SimpleNamespace(**{**res.__dict__, "case": strong}))
    # The clamp's corner peak is next to the support: the peak away from supports and loads governs.
    assert res.governing["basis"] == "away"
    assert c.status == "pass" and c.value == pytest.approx(res.governing["value"] / 1000.0)
    assert c.details["margin"] == pytest.approx(1000.0 / res.governing["value"] - 1.0)
    none = replace(res.case, material=replace(res.case.material, yield_strength=None))
    assert ck.check_yield(SimpleNamespace(**{**res.__dict__, "case": none})).status == "skip"


def test_checks_in_summary_and_cli(cantilever, tmp_path, capsys):
    path, _ = cantilever
    out = tmp_path / "out"
    # The yield check FAILs: the run writes its results and ends with exit code 4 (README).
    assert main(["run", str(path), "--out", str(out)]) == 4
    doc = json.loads((out / "summary.json").read_text())
    assert set(doc["checks"]) == {f.__name__[len("check_"):] for f in ck.CHECKS} - {"frequency", "buckling"}
    assert all(c["status"] in ck.STATUSES and c["why"] for c in doc["checks"].values())
    assert doc["checks_worst"] == "fail"
    assert doc["supports"][0]["area"] == pytest.approx(100.0, rel=1e-9)   # the 10 x 10 root face
    assert len(doc["inputs"]["geometry_file"]["sha256"]) == 64
    captured = capsys.readouterr()
    text = captured.out
    assert "plausibility checks" in text and "FAIL  yield" in text
    assert "plausibility check(s) FAIL: yield" in captured.err
    # Advice is never cut: every check's full reason is in the terminal text (wrapped, not cut).
    flat = " ".join(text.split())
    for c in doc["checks"].values():
        assert " ".join(c["why"].split()) in flat
    # Every location printed carries the length unit, as its value carries its own.
    xyz = ", ".join(f"{c:.5g}" for c in doc["max_von_mises"]["at"])
    assert f"MPa at ({xyz}) mm" in flat
    peak = ", ".join(f"{c:.4g}" for c in doc["max_von_mises"]["at"])
    assert f"({peak}) mm" in doc["checks"]["peak_location"]["why"]


def test_stress_jump_cannot_judge_a_peak_in_one_element():
    """A peak node that belongs to one element only has no jump to measure: skip, never pass."""
    pts = np.vstack([CORNER, CORNER[1:] + [1.0, 0, 0]])
    cells = np.array([[0, 1, 2, 3], [1, 4, 2, 3]])
    vm_nodes = np.array([1.0, 2.0, 1.0, 1.0, 9.0])   # the peak at node 4, in cell 1 only
    el = np.zeros((2, 4, 6))
    el[1, 1, 0] = 9.0
    res = SimpleNamespace(mesh=SimpleNamespace(points=pts, cells=cells), von_mises=vm_nodes, element_stress=el,
                          case=_case())
    c = ck.check_stress_jump(res)
    assert c.status == "skip" and "cannot judge" in c.why


def _l_block(n=4):
    """A structured L: the unit-cell block [0, 2n]^2 x [0, 1] without its [n, 2n]^2 quarter
    (hand-built, no Gmsh): one re-entrant edge along z at x = y = n."""
    from elastofe.mesh import from_arrays
    from elastofe.verify.meshes import structured_block

    pts, cells = structured_block(2 * n, 2 * n, 1, order=1)
    pts = pts * np.array([2 * n, 2 * n, 1.0])
    c = pts[cells].mean(axis=1)
    keep = ~((c[:, 0] > n) & (c[:, 1] > n))
    return from_arrays(pts, cells[keep])


def test_reentrant_edge_nodes_of_an_l_block():
    # The L's inner corner is the only concave edge; its material angle is 270 deg (geometry).
    mesh = _l_block()
    ang = ck.reentrant_edge_nodes(mesh)
    hit = np.flatnonzero(np.isfinite(ang))
    assert hit.size == 2   # the two ends of the corner line (one element through z)
    assert np.allclose(mesh.points[hit][:, :2], 4.0)
    assert np.allclose(ang[hit], 270.0)


def test_sharp_edge_check_flags_a_peak_on_the_inner_corner():
    mesh = _l_block()
    vm = np.linalg.norm(mesh.points[:, :2] - 4.0, axis=1)
    vm = 1.0 / (0.1 + vm)   # a peak at the inner corner
    near = ck.NearRegions(distance=np.full(mesh.nodes, np.inf), which=np.full(mesh.nodes, -1), names=[],
                          kinds={}, local_size=np.ones(mesh.nodes))
    res = SimpleNamespace(mesh=mesh, von_mises=vm, case=_case(), near=near, load_cases={}, governing=None,
                          region_ids={})
    c = ck.check_sharp_edge(res)
    assert c.status == "warn" and "re-entrant" in c.why and c.value == pytest.approx(270.0)
    # The same field with its peak moved to a convex outer corner: no warning.
    res.von_mises = 1.0 / (0.1 + np.linalg.norm(mesh.points[:, :2] - [8.0, 0.0], axis=1))
    assert ck.check_sharp_edge(res).status == "pass"


def test_sharp_edge_check_flags_a_peak_one_element_off_the_inner_corner():
    """The nodal-averaged peak of a corner singularity can sit at a neighbour of the edge node (an L
    bracket at 4 mm elements peaked 1.26 mm from its 270 deg edge, and the check passed): a peak in an
    element touching the re-entrant edge is the singularity's (Williams, J. Appl. Mech. 19, 1952) and
    warns; a peak two elements away still passes."""
    mesh = _l_block()
    near = ck.NearRegions(distance=np.full(mesh.nodes, np.inf), which=np.full(mesh.nodes, -1), names=[],
                          kinds={}, local_size=np.ones(mesh.nodes))
    res = SimpleNamespace(mesh=mesh, case=_case(), near=near, load_cases={}, governing=None, region_ids={})
    res.von_mises = 1.0 / (0.1 + np.linalg.norm(mesh.points[:, :2] - [3.0, 4.0], axis=1))   # 1 element off
    c = ck.check_sharp_edge(res)
    assert c.status == "warn" and "within one element of a re-entrant" in c.why
    assert c.value == pytest.approx(270.0) and c.details["overall_next_to_reentrant_edge"]
    res.von_mises = 1.0 / (0.1 + np.linalg.norm(mesh.points[:, :2] - [2.0, 4.0], axis=1))   # 2 elements off
    c = ck.check_sharp_edge(res)
    assert c.status == "pass" and not c.details["overall_next_to_reentrant_edge"]


def test_density_message_names_the_case_unit_as_labelled():
    """7.85e-7 t/mm^3 is 785,000 kg/m^3 (1 t/mm^3 = 1e12 kg/m^3, SI prefixes): the failure names the
    case's density unit as the outputs label it (t/mm³), not pint's expression N*s^2/mm^4."""
    c = ck.check_units(SimpleNamespace(case=_case(E="200 GPa", density=7.85e-7)))
    assert c.status == "fail" and "t/mm³" in c.why and "N*s^2" not in c.why
    assert c.details["density_kg_m3"] == pytest.approx(7.85e5, rel=1e-12)


@pytest.mark.gmsh
def test_yield_warns_when_another_load_cases_peak_at_a_support_exceeds_it(parts):
    """The governing case is the one of the largest governing value (here the bending case, judged away
    from the clamp); an axial case whose peak sits at the clamp's corner may still reach higher. When that
    peak exceeds yield, the check must warn (docs/checks.md: 'warn when yield is exceeded only next to a
    support'), not pass on the governing case's own overall peak. The probe's bar: 225.9 MPa governing in
    'b', 262.6 MPa at the clamp in 'a', yield 250 MPa: it said PASS."""
    from dataclasses import replace

    doc = {"geometry": {"file": str(parts["bar"])}, "material": {"E": 210000.0, "nu": 0.3},
           "mesh": {"order": 2, "size": 5.0},
           "regions": {"root": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0]}},
                       "tip": {"plane": {"point": [100, 0, 0], "normal": [1, 0, 0]}}},
           "support": [{"region": "root", "fix": "xyz"}],
           "load": [{"region": "tip", "force": [21000, 0, 0], "case": "a"},
                    {"region": "tip", "force": [0, -400, 0], "case": "b"}]}
    res = solve_case(parse_case(doc))
    gov = res.governing
    peaks = {n: float(cr.von_mises.max()) for n, cr in res.load_cases.items()}
    other = max((n for n in peaks if n != gov["load_case"]), key=peaks.get)
    # The set-up: the largest peak is another case's, above the governing value (21000 N / 100 mm^2 =
    # 210 MPa axial, raised at the clamp's corner by its Poisson constraint, against 400 N x 100 mm x 5 mm /
    # (10^4/12 mm^4) = 240 MPa bending at the root, less two elements away: flexure formula).
    assert peaks[other] > gov["value"] and peaks[other] > gov["overall"]["value"]
    fy = 0.5 * (gov["value"] + peaks[other])
    c = ck.check_yield(SimpleNamespace(**{**res.__dict__, "case": replace(
        res.case, material=replace(res.case.material, yield_strength=fy))}))
    assert c.status == "warn" and f"in '{other}'" in c.why
    assert c.details["max_von_mises"] == pytest.approx(peaks[other], rel=1e-12)
    assert c.details["max_von_mises_load_case"] == other
