"""Several load cases from one factorisation, combinations, envelope; results and files per case."""
import json

import meshio
import numpy as np
import pytest

import elastofe
from elastofe.case import parse_case
from elastofe.output import write_results

E, NU = 200000.0, 0.3


def _doc(step, loads, combinations=()):
    doc = {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU, "density": "7850 kg/m^3",
                                                           "expansion": 12e-6},
           "mesh": {"order": 2, "size": 5.0},
           "regions": {"root": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0]}},
                       "tip": {"plane": {"point": [100, 0, 0], "normal": [1, 0, 0]}},
                       "top": {"plane": {"point": [0, 0, 5], "normal": [0, 0, 1]}}},
           "support": [{"region": "root", "fix": "xyz", "moment_about": [0, 0, 0]}],
           "load": loads,
           "point": [{"name": "tip", "at": [100, 0, 0]}],
           "line": [{"name": "mid", "start": [50, -5, 0], "end": [50, 5, 0], "samples": 11}]}
    if combinations:
        doc["combination"] = list(combinations)
    return doc


LOADS = [{"region": "tip", "force": [0, -100, 0], "case": "shear"},
         {"gravity": [0, 0, -1], "case": ["shear", "axial"]},
         {"region": "tip", "force": [500, 0, 0], "case": "axial"},
         {"region": "top", "pressure": 0.05, "case": "press"},
         {"temperature": 30.0, "case": "press"}]
COMBOS = [{"name": "ult", "factors": {"shear": 1.35, "axial": 1.5, "press": -0.5}}]


@pytest.fixture(scope="module")
def runs(parts, tmp_path_factory):
    case = parse_case(_doc(parts["bar"], LOADS, COMBOS))
    res = elastofe.solve_case(case)
    separate = {}
    for name in ("shear", "axial", "press"):
        loads = [{k: v for k, v in ld.items() if k != "case"} for ld in LOADS
                 if name == ld["case"] or name in ld["case"]]
        separate[name] = elastofe.solve_case(parse_case(_doc(parts["bar"], loads)), mesh=res.mesh)
    out = tmp_path_factory.mktemp("lc") / "out"
    doc = write_results(res, out)
    return res, separate, doc, out


def test_combined_solve_equals_separate_solves(runs):
    # Linear superposition (common practice): one factorisation with several right-hand sides gives
    # what separate solves give, to round-off.
    res, sep, _, _ = runs
    for name, r in sep.items():
        cr = res.load_cases[name]
        scale = np.abs(r.u).max()
        np.testing.assert_allclose(cr.u, r.u, rtol=0, atol=1e-10 * scale)
        np.testing.assert_allclose(cr.stress, r.stress, rtol=0, atol=1e-9 * np.abs(r.stress).max())
        np.testing.assert_allclose(cr.reactions["root"]["force"], r.reactions["root"]["force"],
                                   rtol=0, atol=1e-9 * np.abs(r.reactions["root"]["force"]).max())
        assert cr.equilibrium_error < 1e-9
        np.testing.assert_allclose(cr.points["tip"]["displacement"], r.points["tip"]["displacement"],
                                   rtol=0, atol=1e-10 * scale)
    # The first load case fills the top-level fields.
    assert res.load_case == "shear"
    np.testing.assert_allclose(res.u, sep["shear"].u, rtol=0, atol=1e-10 * np.abs(res.u).max())
    # A combination is the factored sum of its load cases, thermal stress included.
    ult = res.load_cases["ult"]
    u = 1.35 * sep["shear"].u + 1.5 * sep["axial"].u - 0.5 * sep["press"].u
    s = 1.35 * sep["shear"].stress + 1.5 * sep["axial"].stress - 0.5 * sep["press"].stress
    np.testing.assert_allclose(ult.u, u, rtol=0, atol=1e-10 * np.abs(u).max())
    np.testing.assert_allclose(ult.stress, s, rtol=0, atol=1e-9 * np.abs(s).max())
    F = 1.35 * sep["shear"].applied_force + 1.5 * sep["axial"].applied_force - 0.5 * sep["press"].applied_force
    np.testing.assert_allclose(ult.applied_force, F, rtol=1e-12, atol=1e-9)
    assert ult.equilibrium_error < 1e-9
    # Envelope: the largest von Mises of all cases and combinations at every node.
    allvm = np.stack([c.von_mises for c in res.load_cases.values()])
    np.testing.assert_array_equal(res.envelope["von_mises"], allvm.max(axis=0))


def test_summary_files_and_arrays_per_case(runs):
    res, _, doc, out = runs
    assert set(doc["load_cases"]) == {"shear", "axial", "press", "ult"}
    for entry in doc["load_cases"].values():
        for key in ("kind", "max_displacement", "max_von_mises", "reactions", "equilibrium_error", "points", "lines"):
            assert key in entry
        assert (out / entry["lines"]["mid"]).is_file()
        assert entry["reactions"]["root"]["moment_about"] is not None
    assert doc["load_cases"]["ult"]["kind"] == "combination"
    assert doc["load_cases"]["ult"]["factors"] == {"shear": 1.35, "axial": 1.5, "press": -0.5}
    env = doc["envelope"]["max_von_mises"]
    assert env["value"] == pytest.approx(max(e["max_von_mises"]["value"] for e in doc["load_cases"].values()))
    assert doc["load_case"] == "shear" and doc["lines"]["mid"] == "line-mid-shear.csv"
    # Every load reports its resultant and the cases it belongs to.
    assert doc["loads"][1]["cases"] == ["shear", "axial"]
    m = meshio.read(out / "result.vtu")
    for name in ("shear", "axial", "press", "ult"):
        assert f"displacement-{name}" in m.point_data and f"von_mises-{name}" in m.point_data
    assert "von_mises-envelope" in m.point_data and "temperature_change-press" in m.point_data


def test_plain_loads_keep_todays_summary(cantilever_case, tmp_path):
    res = elastofe.run(cantilever_case(size=5.0, order=1), out=tmp_path / "o")
    doc = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert "load_cases" not in doc and "envelope" not in doc
    assert doc["lines"] == {"mid": "line-mid.csv"} and res.load_cases == {}


def test_load_case_keys_are_checked(parts):
    loads = [dict(LOADS[0]), {"region": "tip", "force": [1, 0, 0]}]
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(_doc(parts["bar"], loads))
    assert err.value.key == "load[2].case"
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(_doc(parts["bar"], LOADS, [{"name": "c", "factors": {"shaer": 1.0}}]))
    assert err.value.key == "combination[1].factors.shaer" and "did you mean 'shear'" in str(err.value)
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(_doc(parts["bar"], LOADS, [{"name": "axial", "factors": {"shear": 1.0}}]))
    assert err.value.key == "combination[1].name"


@pytest.mark.parametrize("backend", ["scipy", "auto"])
def test_every_backend_solves_several_load_cases(parts, backend):
    # Superposition again (common practice), through each installed backend's multi-right-hand-side path.
    loads = [{"region": "tip", "force": [0, -100, 0], "case": "a"}, {"region": "tip", "force": [0, 0, 80], "case": "b"}]
    doc = _doc(parts["bar"], loads, [{"name": "ab", "factors": {"a": 2.0, "b": -1.0}}])
    doc["mesh"] = {"order": 1, "size": 5.0}
    doc["solver"] = {"backend": backend}
    res = elastofe.solve_case(parse_case(doc))
    one = _doc(parts["bar"], [{"region": "tip", "force": [0, -200, -80]}])
    one["mesh"] = doc["mesh"]
    ref = elastofe.solve_case(parse_case(one), mesh=res.mesh)
    np.testing.assert_allclose(res.load_cases["ab"].u, ref.u, rtol=0, atol=1e-10 * np.abs(ref.u).max())
    assert res.residual < 1e-8


def test_load_cases_built_in_code_are_validated(parts):
    from dataclasses import replace

    from elastofe.case import validate
    from elastofe.case.schema import Combination, LoadCase

    case = parse_case(_doc(parts["bar"], LOADS, COMBOS))
    with pytest.raises(elastofe.CaseError):
        validate(replace(case, load_cases=case.load_cases + (LoadCase("extra", (99,)),)))
    with pytest.raises(elastofe.CaseError) as err:
        validate(replace(case, combinations=(Combination("c", (("nope", 1.0),)),)))
    assert err.value.key == "combination[1].factors.nope"


def test_small_displacement_check_takes_the_largest_case(runs):
    """The small-displacement check judges the largest displacement of every load case and
    combination (as the yield check judges the governing peak of all of them), naming its case."""
    res, _, _, _ = runs
    worst = max(res.load_cases, key=lambda n: np.linalg.norm(res.load_cases[n].u, axis=1).max())
    umax = float(np.linalg.norm(res.load_cases[worst].u, axis=1).max())
    chk = {c.name: c for c in res.checks}["small_displacement"]
    assert chk.details["max_displacement"] == pytest.approx(umax, rel=1e-12)
    assert worst != res.load_case and f"(in '{worst}')" in chk.why


def test_printed_envelope_location_has_its_unit(runs):
    """Every printed number carries its unit: the envelope's location was printed as a bare '(0, 10, 10)'."""
    from elastofe.cli import _load_case_rows

    _, _, doc, _ = runs
    rows = dict(_load_case_rows(doc))
    env = rows["envelope of von Mises"]
    assert env.endswith(f") {doc['units']['length']}") and doc["units"]["length"] == "mm"


def test_peak_location_check_judges_the_governing_case(runs):
    """The peak-location check looks at the peak of the load case or combination that governs (as the
    yield check does), not at the first case shown at the top level: the probe's bar reported the axial
    case's 250 MPa clamp corner while the combination's 477 MPa peak governed."""
    res, _, _, _ = runs
    gcase = res.governing["load_case"]
    assert gcase != res.load_case   # the set-up: the combination governs, not the first case
    chk = {c.name: c for c in res.checks}["peak_location"]
    vm = res.load_cases[gcase].von_mises
    assert chk.details["load_case"] == gcase
    np.testing.assert_allclose(chk.details["peak_at"], res.mesh.points[int(np.argmax(vm))], rtol=0, atol=1e-12)


def test_stress_jump_check_judges_the_governing_case(runs):
    """The stress-jump check judges the peak of the load case or combination that governs: its
    element values are recovered there from its displacements. Independent value: the same element
    values as the factored sum of the separate runs' element values (linear superposition, common
    practice; thermal part of 'press' included), to round-off."""
    res, sep, _, _ = runs
    gcase = res.governing["load_case"]
    assert gcase != res.load_case   # the set-up: another case than the first governs
    chk = {c.name: c for c in res.checks}["stress_jump"]
    assert chk.details["load_case"] == gcase and f"'{gcase}', which governs" in chk.why
    from elastofe.post.checks import stress_jump_at
    from elastofe.post.recovery import von_mises

    # Its peak sits at a corner node of one element here (cannot judge); the recovery is checked at
    # the highest node that several elements share, and at every case and combination.
    for name, cr in res.load_cases.items():
        shared = np.bincount(res.mesh.cells.ravel(), minlength=res.mesh.nodes) >= 2
        node = int(np.argmax(np.where(shared, cr.von_mises, -1.0)))
        j = stress_jump_at(res, node, cr)
        e, a = np.nonzero(res.mesh.cells == node)
        vm = von_mises(sum(f * sep[n].element_stress[e, a] for n, f in cr.factors.items()))
        assert j["elements"] == e.size >= 2
        assert j["element_min"] == pytest.approx(vm.min(), rel=1e-9), name
        assert j["element_max"] == pytest.approx(vm.max(), rel=1e-9), name
        assert j["averaged"] == pytest.approx(cr.von_mises[node], rel=1e-12)
    # The first case's element values recovered the same way are the run's own, to round-off.
    from elastofe.post.checks import case_element_stress

    first = case_element_stress(res, res.load_cases[res.load_case], np.arange(res.mesh.cells.shape[0]))
    np.testing.assert_allclose(first, res.element_stress, rtol=0, atol=1e-9 * np.abs(res.element_stress).max())
