"""Shared fixtures: small parts of our own built with Gmsh's OpenCASCADE kernel and written as STEP."""
from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pytest

from elastofe.geometry import gmsh_session

ROOT = Path(__file__).resolve().parent.parent


def write_step(path: Path, build) -> Path:
    """Run ``build(occ)`` in a Gmsh session and write the result as STEP."""
    with gmsh_session() as gmsh:
        build(gmsh.model.occ)
        gmsh.model.occ.synchronize()
        gmsh.write(str(path))
    return path


@pytest.fixture(scope="session")
def parts(tmp_path_factory) -> dict[str, Path]:
    d = tmp_path_factory.mktemp("parts")
    out = {}
    # Cantilever bar 100 x 10 x 10, root face at x = 0, centred on the x axis.
    out["bar"] = write_step(d / "bar.step", lambda occ: occ.addBox(0, -5, -5, 100, 10, 10))
    # Quarter of a thick ring: a = 10, b = 20, axial length 5 (z from 0 to 5).
    def ring(occ):
        outer = occ.addCylinder(0, 0, 0, 0, 0, 5, 20)
        inner = occ.addCylinder(0, 0, 0, 0, 0, 5, 10)
        quad = occ.addBox(0, 0, 0, 30, 30, 5)
        ann, _ = occ.cut([(3, outer)], [(3, inner)])
        occ.intersect(ann, [(3, quad)])
    out["ring"] = write_step(d / "ring.step", ring)
    out["cube"] = write_step(d / "cube.step", lambda occ: occ.addBox(0, 0, 0, 1, 1, 1))
    return out


def write_case(path: Path, text: str) -> Path:
    path.write_text(textwrap.dedent(text))
    return path


def cantilever_text(bar: Path, *, size: float = 2.5, order: int = 2, E: float = 200000.0, nu: float = 0.3,
                    force=(0, -100, 0), title: str = "cantilever", material: str = "", mesh: str = "",
                    tip_point: bool = True, line_samples: int = 21, fix: str = "xyz", extra: str = "") -> str:
    """Case text of the ``parts["bar"]`` (100 x 10 x 10, root face x = 0, centred on the x axis) as a
    cantilever clamped at x = 0 with a force on the tip face x = 100: the one cantilever of the tests.

    ``material`` and ``mesh`` are extra lines of those sections; ``extra`` is appended (more
    sections); ``tip_point`` adds the point "tip" at (100, 0, 0), ``line_samples`` > 0 the line "mid"
    across the mid-span section (y from -5 to 5).
    """
    text = f"""
        title = "{title}"
        [geometry]
        file = "{bar}"
        [material]
        E = {E}
        nu = {nu}
        {material}
        [mesh]
        order = {order}
        size = {size}
        {mesh}
        [regions]
        root = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        tip = {{ plane = {{ point = [100, 0, 0], normal = [1, 0, 0] }} }}
        [[support]]
        region = "root"
        fix = "{fix}"
        [[load]]
        region = "tip"
        force = [{force[0]}, {force[1]}, {force[2]}]
        """
    if tip_point:
        text += """
        [[point]]
        name = "tip"
        at = [100, 0, 0]
        """
    if line_samples:
        text += f"""
        [[line]]
        name = "mid"
        start = [50, -5, 0]
        end = [50, 5, 0]
        samples = {line_samples}
        """
    return textwrap.dedent(text) + textwrap.dedent(extra)


@pytest.fixture
def cantilever_case(parts, tmp_path):
    """A case file for the bar as a cantilever under a tip shear of 100 N (factory: size, order)."""
    def make(size=2.5, order=2, extra=""):
        return write_case(tmp_path / f"bar-{size}-{order}.toml", cantilever_text(parts["bar"], size=size,
                                                                              order=order, extra=extra))
    return make


def ring_case(path: Path, ring: Path, *, E: float, nu: float, pressure: float, size: float = 2.0,
              top_value: float = 0.0, extra: str = "") -> Path:
    """A case file for the quarter ring of the ``parts`` fixture as a plane-strain thick cylinder:
    symmetry on x = 0 and y = 0, u_z held on both ends (``top_value`` prescribed on the top face),
    internal pressure on the bore of radius 10; ``extra`` (points, lines, [solver]) is appended."""
    text = textwrap.dedent(f"""
        [geometry]
        file = "{ring}"
        [material]
        E = {E}
        nu = {nu}
        [mesh]
        order = 2
        size = {size}
        [regions]
        sym_x = {{ plane = {{ point = [0, 0, 0], normal = [1, 0, 0] }} }}
        sym_y = {{ plane = {{ point = [0, 0, 0], normal = [0, 1, 0] }} }}
        ends = {{ box = {{ min = [-1, -1, -1], max = [21, 21, 0] }} }}
        top = {{ plane = {{ point = [0, 0, 5], normal = [0, 0, 1] }} }}
        bore = {{ cylinder = {{ radius = 10.0 }} }}
        [[support]]
        region = "sym_x"
        fix = "x"
        [[support]]
        region = "sym_y"
        fix = "y"
        [[support]]
        region = "ends"
        fix = "z"
        [[support]]
        region = "top"
        fix = "z"
        value = [0, 0, {top_value}]
        [[load]]
        region = "bore"
        pressure = {pressure}
        """)
    path.write_text(text + textwrap.dedent(extra))
    return path


def rng():
    return np.random.default_rng(12345)


#: Fixtures that build parts with Gmsh: a test using any of them (directly or through another
#: fixture) gets the ``gmsh`` marker, so ``-m "not gmsh"`` selects the tests that need no Gmsh.
GMSH_FIXTURES = {"parts"}


def pytest_collection_modifyitems(config, items):
    for item in items:
        if GMSH_FIXTURES & set(getattr(item, "fixturenames", ())):
            item.add_marker(pytest.mark.gmsh)


def pytest_terminal_summary(terminalreporter):
    """Sum the inputs tried by the fuzzing tests (``fuzz_examples`` test property), xdist included."""
    total, tests = 0, 0
    for reports in terminalreporter.stats.values():
        for rep in reports:
            if getattr(rep, "when", None) != "call":
                continue
            for name, value in getattr(rep, "user_properties", ()):
                if name == "fuzz_examples":
                    total += int(value)
                    tests += 1
    if tests:
        terminalreporter.write_line(f"case-loader fuzzing: {total} inputs tried in {tests} tests, "
                                    "each answered with a Case or CaseError")
    # Rounds of the results-folder tests (tests/test_nothing_lost.py).
    rounds: dict[str, int] = {}
    for reports in terminalreporter.stats.values():
        for rep in reports:
            if getattr(rep, "when", None) == "call":
                for name, value in getattr(rep, "user_properties", ()):
                    if name in ("kill_rounds", "writer_rounds", "reader_reads"):
                        rounds[name] = rounds.get(name, 0) + int(value)
    if rounds:
        terminalreporter.write_line(
            f"results folders: {rounds.get('kill_rounds', 0)} writers killed during the switch-over, "
            f"{rounds.get('writer_rounds', 0)} rounds of two writers at once, {rounds.get('reader_reads', 0)} reads "
            "during switches; every folder showed one complete run")
