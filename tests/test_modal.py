"""Effective modal masses and the naming of rigid-body modes (post.modal)."""
from __future__ import annotations

import numpy as np
import pytest

from elastofe.bc import free_rigid_motions, rigid_modes
from elastofe.fem.assembly import StiffnessPattern, assemble_stiffness
from elastofe.fem.mass import assemble_mass
from elastofe.post.modal import modal_mass, name_rigid_modes, rigid_share
from elastofe.solve import natural_modes
from elastofe.verify.meshes import structured_block


def _cube():
    p, c = structured_block(4, 4, 4, 1)
    pat = StiffnessPattern(c, p.shape[0])
    return p, c, assemble_stiffness(p, c, 1.0, 1.0, pattern=pat), assemble_mass(p, c, 1.0, pattern=pat)


def _held_on_line(p, y, z):
    on = (np.abs(p[:, 1] - y) < 1e-9) & (np.abs(p[:, 2] - z) < 1e-9)
    held = np.zeros((p.shape[0], 3), bool)
    held[on, 1:] = True  # y and z held along a line parallel to x
    return held


@pytest.mark.parametrize("line,expected", [
    ((0.5, 0.5), ["translation along x", "rotation about x"]),
    ((0.0, 0.0), ["translation along x", "rigid-body motion"]),
])
def test_names_of_the_free_motions(line, expected):
    p, _c, K, M = _cube()
    held = _held_on_line(p, *line)
    free = ~held.ravel()
    Kf, Mf = K[free][:, free].tocsr(), M[free][:, free].tocsr()
    R = rigid_modes(p)[free]
    res = natural_modes(Kf, Mf, 5, near_nullspace=R)
    assert res.info["free_rigid"] == 2
    V, names = name_rigid_modes(Mf, res.vectors, R)
    assert names[:2] == expected and names[2:] == [None] * 3
    # The named basis still spans the zero modes, mass-orthonormal; elastic modes are untouched.
    assert V.T @ (Mf @ V) == pytest.approx(np.eye(5), abs=1e-9)
    assert np.abs(Kf @ V[:, :2]).max() < 1e-8 * np.abs(Kf).max()
    assert np.array_equal(V[:, 2:], res.vectors[:, 2:])
    # The restraint check finds the same free motions (its words for the off-centre axis).
    words = free_rigid_motions(p, np.flatnonzero(held.ravel()), 1.0)
    assert len(words) == 2 and words[0] == "translation along x"
    if expected[1] == "rotation about x":
        assert words[1] == "rotation about x"
    else:
        assert words[1].startswith("rotation about an axis along x through")


def test_modal_mass_definitions():
    p, _c, K, M = _cube()
    rng = np.random.default_rng(0)
    V = rng.standard_normal((K.shape[0], 4))
    V /= np.sqrt(np.einsum("ij,ij->j", V, M @ V))
    T = rigid_modes(p)[:, :3]
    mm = modal_mass(M, V, T)
    assert mm.total == pytest.approx([1.0, 1.0, 1.0])  # unit cube, unit density
    assert mm.participation == pytest.approx(V.T @ (M @ T))
    assert mm.fraction == pytest.approx(mm.participation**2 / mm.total)
    assert mm.cumulative[-1] == pytest.approx(mm.fraction.sum(axis=0))
    with pytest.raises(ValueError, match="rows"):
        modal_mass(M, V[:-3], T)
    assert rigid_share(M, T, rigid_modes(p)) == pytest.approx(np.ones(3))
    assert rigid_share(M, V, rigid_modes(p)).max() < 0.5
