"""Inputs beyond any physical range are refused when the case is loaded, with the key and the
bounds in the case's units (the bounds are the loader's stated SI limits, converted by pint)."""
from __future__ import annotations

import pytest

from elastofe.case import parse_case
from elastofe.errors import CaseError


def doc(units="mm-N", material=None, loads=None, **extra):
    m = {"E": {"mm-N": 2e5, "m-N": 2e11, "in-lbf": 3e7}[units], "nu": 0.3}
    m.update(material or {})
    d = {"units": units, "geometry": {"file": "a.step"}, "material": m,
         "regions": {"a": {"surfaces": [1]}}, "support": [{"region": "a"}], "load": loads or []}
    d.update(extra)
    return d


def refused(d, key, *fragments):
    with pytest.raises(CaseError) as e:
        parse_case(d)
    assert e.value.key == key, str(e.value)
    for f in fragments:
        assert f in str(e.value), str(e.value)


@pytest.mark.parametrize("units, E, ok", [
    ("m-N", 1.0, True), ("m-N", 1e13, True), ("m-N", 0.5, False), ("m-N", 2e13, False),
    ("mm-N", 1e-6, True), ("mm-N", 1e7, True), ("mm-N", 2e11, False),
    ("in-lbf", 1.4e9, True), ("in-lbf", 1.5e9, False),   # 1e13 Pa = 1.450e9 psi (pint)
])
def test_modulus_range(units, E, ok):
    d = doc(units, {"E": E})
    if ok:
        assert parse_case(d).material.E == E
    else:
        refused(d, "material.E", "is beyond any physical range")


def test_modulus_message_states_bounds_in_case_units():
    refused(doc("in-lbf", {"E": 2e11}), "material.E", "between 0.000145 and 1.45e+09 psi (1 to 1e+13 Pa)")


@pytest.mark.parametrize("units, rho, ok", [
    ("m-N", 7850.0, True), ("m-N", 1e-3, True), ("m-N", 2e6, False), ("m-N", 1e-4, False),
    ("mm-N", 7.85e-9, True), ("mm-N", 7850.0, False), ("in-lbf", 7.3e-4, True), ("in-lbf", 7850.0, False),
    ("mm-N", "7850 kg/m^3", True), ("mm-N", "7850 t/m^3", False),
])
def test_density_range(units, rho, ok):
    d = doc(units, {"density": rho})
    if ok:
        parse_case(d)
    else:
        refused(d, "material.density", "is beyond any physical range", "1e+06 kg/m^3")


def test_expansion_range():
    assert parse_case(doc(material={"expansion": "12e-6 1/K"})).material.expansion == pytest.approx(12e-6)
    refused(doc(material={"expansion": 12.0}), "material.expansion", "must not exceed 0.01 1/K")
    refused(doc(material={"expansion": "-2e-2 1/K"}), "material.expansion", "must not exceed 0.01 1/K")


@pytest.mark.parametrize("load, key, fragment", [
    ({"region": "a", "force": [0, 0, 1e300]}, "load[1].force[2]", "1e+15 N"),
    ({"region": "a", "force": [0, 0, "1e16 N"]}, "load[1].force[2]", "1e+15 N"),
    ({"region": "a", "pressure": 2e9}, "load[1].pressure", "1e+09 MPa (1e+15 Pa)"),
    ({"region": "a", "at": [0, 0, 0], "moment": [0, 0, 1e22]}, "load[1].moment[2]", "1e+21 N·mm (1e+18 N·m)"),
    ({"gravity": [0, 0, -1e308]}, "load[1].gravity[2]", "1e+09 g"),
    ({"temperature": 1e6}, "load[1].temperature", "1e+05 K"),
    ({"region": "a", "pressure": 1.0, "gradient": [0, 0, 1e20]}, "load[1].gradient[2]", "1e+09 MPa/mm (1e+18 Pa/m)"),
])
def test_loads_beyond_range(load, key, fragment):
    mat = {"density": "7850 kg/m^3", "expansion": 1e-5}
    refused(doc(material=mat, loads=[load]), key, "is beyond any physical range", fragment)


def test_large_but_physical_loads_pass():
    """A 1e9 N force (the largest engineering loads, from memory), 1e4 g, a 1000 K change: accepted."""
    d = doc(material={"density": "7850 kg/m^3", "expansion": 1e-5},
            loads=[{"region": "a", "force": [0, 0, 1e9]}, {"gravity": [0, 0, -1e4]}, {"temperature": 1000.0}])
    assert len(parse_case(d).loads) == 3


def test_coordinates_and_foundation_beyond_range():
    d = doc(point=[{"name": "p", "at": [1e12, 0, 0]}])
    refused(d, "point[1].at[0]", "1e+09 mm (1e+06 m)")
    d = doc()
    d["support"] = [{"region": "a", "foundation": {"normal": 1e20}}]
    refused(d, "support[1].foundation.normal", "1e+12 N/mm^3")
