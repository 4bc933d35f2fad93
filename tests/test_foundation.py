"""Elastic supports: a foundation of stiffness per unit area (a consistent surface stiffness)."""
import numpy as np
import pytest

import elastofe
from elastofe.case import parse_case
from tests.conftest import write_step

pytestmark = pytest.mark.gmsh  # builds or meshes parts with Gmsh

E, NU, K, P, H = 200000.0, 0.3, 50.0, 2.0, 10.0


@pytest.fixture(scope="module")
def block(tmp_path_factory):
    d = tmp_path_factory.mktemp("found")
    return write_step(d / "block.step", lambda occ: occ.addBox(0, 0, 0, 10, 10, H))


def _doc(step, supports, order=2):
    return {"geometry": {"file": str(step)}, "material": {"E": E, "nu": NU},
            "mesh": {"order": order, "size": 4.0},
            "regions": {"bottom": {"plane": {"point": [0, 0, 0], "normal": [0, 0, 1]}},
                        "top": {"plane": {"point": [0, 0, H], "normal": [0, 0, 1]}},
                        "x0": {"plane": {"point": [0, 0, 0], "normal": [1, 0, 0]}},
                        "y0": {"plane": {"point": [0, 0, 0], "normal": [0, 1, 0]}}},
            "support": supports, "load": [{"region": "top", "pressure": P}],
            "point": [{"name": "bot", "at": [7, 3, 0]}, {"name": "top", "at": [7, 3, H]}]}


@pytest.mark.parametrize("order", [1, 2])
def test_block_on_foundation_settles_p_over_k(block, order):
    # A Winkler foundation of normal stiffness k per unit area under a uniform pressure p settles
    # by p / k (common practice); the block above it shortens by p H / E in uniaxial stress
    # (Hooke's law), with sliding planes x = 0 and y = 0 leaving the Poisson expansion free.
    sup = [{"region": "bottom", "foundation": {"normal": f"{K} N/mm^3"}},
           {"region": "x0", "fix": "n"}, {"region": "y0", "fix": "n"}]
    res = elastofe.solve_case(parse_case(_doc(block, sup, order)))
    bottom = np.abs(res.mesh.points[:, 2]) < 1e-9
    np.testing.assert_allclose(res.u[bottom, 2], -P / K, rtol=1e-9)
    assert res.points["top"]["displacement"][2] == pytest.approx(-P / K - P * H / E, rel=1e-9)
    # The foundation's reaction carries the whole load: p A upward.
    R = res.reactions["bottom"]["force"]
    np.testing.assert_allclose(R, [0, 0, P * 100.0], rtol=1e-9, atol=1e-9)
    assert res.equilibrium_error < 1e-9
    np.testing.assert_allclose(res.stress[:, 2], -P, rtol=1e-8)


def test_foundation_restrains_what_it_resists(block):
    # Normal stiffness only: the block may still slide in x, y and turn about z.
    sup = [{"region": "bottom", "foundation": {"normal": K}}]
    with pytest.raises(elastofe.ModelError) as err:
        elastofe.solve_case(parse_case(_doc(block, sup, order=1)))
    msg = str(err.value)
    assert "translation along x" in msg and "translation along y" in msg and "rotation about z" in msg
    assert "translation along z" not in msg
    # With a tangential stiffness as well, the foundation alone holds the part.
    sup = [{"region": "bottom", "foundation": {"normal": K, "tangential": K / 10}}]
    res = elastofe.solve_case(parse_case(_doc(block, sup, order=1)))
    # Mean settlement is p / k exactly (vertical equilibrium of the springs, common practice).
    bottom = np.abs(res.mesh.points[:, 2]) < 1e-9
    from elastofe.fem.surface import node_areas
    w = node_areas(res.mesh.points, res.mesh.faces[np.all(bottom[res.mesh.faces], axis=1)])
    assert (w @ res.u[:, 2]) / w.sum() == pytest.approx(-P / K, rel=1e-9)


def test_foundation_keys_are_checked(block):
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(_doc(block, [{"region": "bottom", "foundation": {"normal": K}, "fix": "z"}]))
    assert err.value.key == "support[1].fix"
    with pytest.raises(elastofe.CaseError) as err:
        parse_case(_doc(block, [{"region": "bottom", "foundation": {"normal": "50 MPa"}}]))
    assert err.value.key == "support[1].foundation.normal" and "dimension" in str(err.value)
