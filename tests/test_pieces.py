"""Loose bodies: the face-connected pieces of a mesh, and the restraint of each piece on its own.

Meshes are built here from structured boxes (six tetrahedra per brick, the Kuhn split, which is
conforming between neighbouring bricks), so every expected count, volume and free motion follows
from the construction. A piece touching another only along an edge or at a vertex is a piece of
its own: such a joint carries no moment.
"""
from __future__ import annotations

import numpy as np
import pytest

from elastofe.bc import Held, check_restrained, free_pieces
from elastofe.errors import ModelError
from elastofe.fem.surface import foundation_stiffness
from elastofe.mesh import connected_pieces, from_arrays, mesh_pieces

# The six tetrahedra of the unit brick along the monotone paths from corner 000 to corner 111.
_CORNER = {(i, j, k): 4 * i + 2 * j + k for i in (0, 1) for j in (0, 1) for k in (0, 1)}
_KUHN = []
for perm in ((0, 1, 2), (0, 2, 1), (1, 0, 2), (1, 2, 0), (2, 0, 1), (2, 1, 0)):
    c = [0, 0, 0]
    path = [_CORNER[tuple(c)]]
    for ax in perm:
        c[ax] = 1
        path.append(_CORNER[tuple(c)])
    _KUHN.append(path)
_KUHN = np.array(_KUHN)


def box(lo, hi, n=(2, 2, 2)):
    """Points ``(p, 3)`` and 4-node cells of the box [lo, hi] split into n bricks per direction."""
    lo, hi = np.asarray(lo, float), np.asarray(hi, float)
    axes = [np.linspace(lo[d], hi[d], n[d] + 1) for d in range(3)]
    P = np.stack(np.meshgrid(*axes, indexing="ij"), axis=-1).reshape(-1, 3)
    idx = np.arange(P.shape[0]).reshape(n[0] + 1, n[1] + 1, n[2] + 1)
    cells = []
    for i in range(n[0]):
        for j in range(n[1]):
            for k in range(n[2]):
                corners = np.array([idx[i + a, j + b, k + c] for a in (0, 1) for b in (0, 1) for c in (0, 1)])
                cells.append(corners[_KUHN])
    cells = np.vstack(cells)
    X = P[cells]
    neg = np.einsum("ij,ij->i", np.cross(X[:, 1] - X[:, 0], X[:, 2] - X[:, 0]), X[:, 3] - X[:, 0]) < 0
    cells[neg] = cells[neg][:, [0, 2, 1, 3]]  # one orientation for all, as a mesh file has
    return P, cells


def merged(*boxes):
    """One mesh of several boxes; coincident points become one node (so touching boxes share nodes)."""
    pts = np.vstack([b[0] for b in boxes])
    offs = np.cumsum([0] + [b[0].shape[0] for b in boxes[:-1]])
    cells = np.vstack([b[1] + o for b, o in zip(boxes, offs)])
    key = np.round(pts, 9)
    uniq, inv = np.unique(key, axis=0, return_inverse=True)
    return from_arrays(uniq, inv.ravel()[cells])


def held_on(mesh, axis, value, comps="xyz"):
    """A :class:`Held` of the given components at the nodes on the plane x[axis] = value."""
    nodes = np.flatnonzero(np.abs(mesh.points[:, axis] - value) < 1e-9)
    dofs = np.sort(np.concatenate([3 * nodes + "xyz".index(c) for c in comps]))
    return Held(dofs, np.zeros(dofs.size), np.zeros(dofs.size, dtype=np.int64))


def union(*helds):
    d = np.unique(np.concatenate([h.dofs for h in helds]))
    return Held(d, np.zeros(d.size), np.zeros(d.size, dtype=np.int64))


ALL_SIX = ["translation along x", "translation along y", "translation along z",
           "rotation about x", "rotation about y", "rotation about z"]


# ----------------------------------------------------------------------------- pieces
def test_face_joins_edge_and_vertex_do_not():
    # Two tetrahedra on the face (1, 2, 3): one piece.
    assert connected_pieces(np.array([[0, 1, 2, 3], [1, 2, 3, 4]]))[0] == 1
    # On the edge (0, 1) only, and at the vertex 0 only: two pieces each.
    n, lab = connected_pieces(np.array([[0, 1, 2, 3], [0, 1, 4, 5]]))
    assert n == 2 and lab.tolist() == [0, 1]
    assert connected_pieces(np.array([[0, 1, 2, 3], [0, 4, 5, 6]]))[0] == 2


def test_touching_boxes_by_face_edge_and_apart():
    a = box([0, 0, 0], [1, 1, 1])
    assert connected_pieces(merged(a, box([1, 0, 0], [2, 1, 1])).cells)[0] == 1   # shared face
    assert connected_pieces(merged(a, box([1, 1, 0], [2, 2, 1])).cells)[0] == 2   # shared edge
    assert connected_pieces(merged(a, box([1, 1, 1], [2, 2, 2])).cells)[0] == 2   # shared vertex
    assert connected_pieces(merged(a, box([3, 0, 0], [4, 1, 1])).cells)[0] == 2   # apart


def test_piece_volume_box_and_shared_nodes():
    """Volumes and boxes by construction: a 1 x 1 x 1 cube and a 2 x 1 x 1 brick touching it along
    the edge x = 1, y = 1 (three nodes of the 2 x 2 x 2 and 2 x 1 x 2 split lie on it)."""
    m = merged(box([0, 0, 0], [1, 1, 1]), box([1, 1, 0], [3, 2, 1], n=(2, 1, 2)))
    labels, pieces = mesh_pieces(m.points, m.cells)
    assert [p.id for p in pieces] == [1, 2]
    assert pieces[0].volume == pytest.approx(1.0, rel=1e-12)
    assert pieces[1].volume == pytest.approx(2.0, rel=1e-12)
    assert pieces[1].bbox_min == pytest.approx((1, 1, 0)) and pieces[1].bbox_max == pytest.approx((3, 2, 1))
    assert pieces[0].shared_nodes == pieces[1].shared_nodes == 3
    assert pieces[0].cells == 48 and pieces[1].cells == 24
    assert labels.shape == (72,)


def test_large_mesh_pieces_are_vectorised():
    """A 30 x 30 x 30 brick mesh (162,000 cells) is one piece; the split is found in one pass."""
    p, c = box([0, 0, 0], [1, 1, 1], n=(30, 30, 30))
    n, lab = connected_pieces(c)
    assert n == 1 and lab.max() == 0


def test_boxes_meshed_apart_against_each_other_are_named_as_touching():
    """Two unit cubes against each other on x = 1, meshed apart (2 and 3 bricks a side: only the
    face's four corners coincide): two pieces, each lying against the other over the whole face,
    area 1 (from the construction). Meshed alike they share the face: one piece, nothing touching.
    Half a cube apart: nothing touching."""
    apart = merged(box([0, 0, 0], [1, 1, 1], n=(2, 2, 2)), box([1, 0, 0], [2, 1, 1], n=(3, 3, 3)))
    _, pieces = mesh_pieces(apart.points, apart.cells)
    assert len(pieces) == 2
    assert [p.touching[0][0] for p in pieces] == [2, 1]
    assert [p.touching[0][1] for p in pieces] == pytest.approx([1.0, 1.0], rel=1e-9)
    assert "lies against piece 2 over 1 mm^2 without sharing nodes" in pieces[0].contact_words("mm")
    # held each on its own: solvable, and the pieces (with their contact) come back for a warning
    both = check_restrained(apart.points, union(held_on(apart, 0, 0.0), held_on(apart, 0, 2.0)), 2.0, mesh=apart)
    assert [p.touching for p in both] == [p.touching for p in pieces]
    _, one = mesh_pieces(*(lambda m: (m.points, m.cells))(merged(box([0, 0, 0], [1, 1, 1]), box([1, 0, 0], [2, 1, 1]))))
    assert len(one) == 1 and one[0].touching == ()
    far = merged(box([0, 0, 0], [1, 1, 1]), box([1.5, 0, 0], [2.5, 1, 1], n=(3, 3, 3)))
    assert all(p.touching == () for p in mesh_pieces(far.points, far.cells)[1])


# ----------------------------------------------------------------------------- restraint
def test_two_disjoint_boxes_one_held_is_refused():
    m = merged(box([0, 0, 0], [1, 1, 1]), box([3, 0, 0], [4, 1, 1]))
    held = held_on(m, 0, 0.0)
    pieces, free = free_pieces(m.points, m.cells, held)
    assert len(pieces) == 2 and len(free) == 1
    info, words = free[0]
    assert info.id == 2 and words == ALL_SIX
    with pytest.raises(ModelError) as e:
        check_restrained(m.points, held, 4.0, mesh=m, length="mm")
    msg = str(e.value)
    assert msg.startswith("the part is not restrained: 1 of its 2 pieces")
    assert "piece 2: 48 elements, volume 1 mm^3, bounding box [3, 0, 0] to [4, 1, 1] mm" in msg
    assert "rotation about z" in msg and "piece 1" not in msg
    # Without the mesh the old whole-part check sees the held face and lets it pass: the reason
    # the pipeline must pass the mesh.
    check_restrained(m.points, held, 4.0)


def test_two_disjoint_boxes_both_held_pass():
    m = merged(box([0, 0, 0], [1, 1, 1]), box([3, 0, 0], [4, 1, 1]))
    check_restrained(m.points, union(held_on(m, 0, 0.0), held_on(m, 0, 4.0)), 4.0, mesh=m)


def test_edge_contact_is_no_connection():
    """A held cube and a second one touching it along an edge only: the second is free; as one
    body it could still turn about the shared edge, so the model is singular either way."""
    m = merged(box([0, 0, 0], [1, 1, 1]), box([1, 1, 0], [2, 2, 1]))
    with pytest.raises(ModelError) as e:
        check_restrained(m.points, held_on(m, 0, 0.0), 3.0, mesh=m)
    msg = str(e.value)
    assert "piece 2" in msg and "along an edge or at a vertex: 3 shared nodes" in msg
    # Holding the second cube too makes both pieces restrained.
    check_restrained(m.points, union(held_on(m, 0, 0.0), held_on(m, 0, 2.0)), 3.0, mesh=m)


def test_three_bodies_names_the_one_left_sliding():
    """Bodies A (held), B (only x held on its face x = 3: slides in y, z and turns about x) and C
    (held): only B is named, with exactly those three motions (common practice: a plane support
    along its normal stops the normal translation and the two rotations about in-plane axes)."""
    m = merged(box([0, 0, 0], [1, 1, 1]), box([3, 0, 0], [4, 1, 1]), box([6, 0, 0], [7, 1, 1]))
    held = union(held_on(m, 0, 0.0), held_on(m, 0, 3.0, "x"), held_on(m, 0, 7.0))
    pieces, free = free_pieces(m.points, m.cells, held)
    assert len(pieces) == 3 and [f[0].id for f in free] == [2]
    assert free[0][1] == ["translation along y", "translation along z", "rotation about x"]


def test_foundation_counts_as_restraint():
    """Body B held only by an elastic foundation (normal and tangential stiffness) on its face
    x = 3: restrained. With normal stiffness only it slides like the x-held body above."""
    m = merged(box([0, 0, 0], [1, 1, 1]), box([3, 0, 0], [4, 1, 1]))
    ids = [s for s in np.unique(m.face_surface)
           if np.allclose(m.points[np.unique(m.surface_faces([s]))][:, 0], 3.0)]
    faces = m.surface_faces(ids)
    held = held_on(m, 0, 0.0)
    check_restrained(m.points, held, 4.0, [foundation_stiffness(m.points, faces, 10.0, 5.0)], mesh=m)
    _, free = free_pieces(m.points, m.cells, held, [foundation_stiffness(m.points, faces, 10.0, 0.0)])
    assert [f[0].id for f in free] == [2]
    assert free[0][1] == ["translation along y", "translation along z", "rotation about x"]


def test_one_piece_keeps_the_whole_part_check():
    """A connected mesh gets the whole-part check and its message (translation along y, ...)."""
    m = merged(box([0, 0, 0], [1, 1, 1]), box([1, 0, 0], [2, 1, 1]))
    with pytest.raises(ModelError, match="the supports leave these rigid-body motions free: translation along y"):
        check_restrained(m.points, held_on(m, 0, 0.0, "x"), 2.0, mesh=m)
    check_restrained(m.points, held_on(m, 0, 0.0), 2.0, mesh=m)


# ----------------------------------------------------------------------------- from STEP files
def _two_body_case(tmp_path, second, backend="auto"):
    """A case on a STEP file of the unit cube and a ``second`` box, the cube's face x = 0 held."""
    from tests.conftest import write_case, write_step

    step = write_step(tmp_path / "bodies.step", lambda occ: (occ.addBox(0, 0, 0, 1, 1, 1), occ.addBox(*second)))
    return write_case(tmp_path / "case.toml", f"""
        [geometry]
        file = "{step}"
        [material]
        E = 200000.0
        nu = 0.3
        [mesh]
        order = 1
        size = 0.5
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        top = {{ box = {{ min = [-0.01, -0.01, 0.99], max = [1.01, 1.01, 1.01] }} }}  # the cube's top only
        [[support]]
        region = "root"
        [[load]]
        region = "top"
        force = [0, 0, -10]
        [solver]
        backend = "{backend}"
        """)


def _stages(path):
    """The pipeline's stages up to the restraint check (mesh, regions, supports, foundations)."""
    from elastofe.bc import foundations, held_dofs
    from elastofe.case import load_case
    from elastofe.geometry import mesh_geometry
    from elastofe.mesh import surface_catalogue
    from elastofe.regions import model_size, resolve_regions

    case = load_case(path)
    mesh = mesh_geometry(case.geometry.file, order=case.mesh.order, size=case.mesh.size)
    cat = surface_catalogue(mesh)
    ids = resolve_regions(case, mesh, cat)
    return mesh, held_dofs(case, mesh, ids, cat), foundations(case, mesh, ids), model_size(mesh)


@pytest.mark.gmsh
@pytest.mark.parametrize("second, contact", [((3, 0, 0, 1, 1, 1), "apart"), ((1, 1, 0, 1, 1, 1), "edge")])
def test_step_with_a_loose_body_is_refused(tmp_path, second, contact):
    """Two solids in one STEP file, one held: the other is named by its body and bounding box."""
    mesh, held, found, scale = _stages(_two_body_case(tmp_path, second))
    with pytest.raises(ModelError) as e:
        check_restrained(mesh.points, held, scale, found, mesh=mesh, length="mm")
    msg = str(e.value)
    assert "1 of its 2 pieces" in msg and "piece 2 (body 2)" in msg
    lo, hi = second[:3], [a + b for a, b in zip(second[:3], second[3:])]
    assert f"bounding box [{lo[0]:g}, {lo[1]:g}, {lo[2]:g}] to [{hi[0]:g}, {hi[1]:g}, {hi[2]:g}] mm" in msg
    assert ("shared nodes" in msg) == (contact == "edge")


@pytest.mark.gmsh
@pytest.mark.parametrize("backend", ["pardiso", "scipy", "amg"])
def test_cli_loose_body_refused_for_every_backend(tmp_path, capfd, backend):
    """Through the command line, every backend: exit 3 and one line naming the loose piece."""
    from elastofe.cli import main

    rc = main(["run", str(_two_body_case(tmp_path, (3, 0, 0, 1, 1, 1), backend)), "-q", "--out", str(tmp_path / "o")])
    err = capfd.readouterr().err
    assert rc == 3 and "piece 2 (body 2)" in err and len(err.strip().splitlines()) == 1
