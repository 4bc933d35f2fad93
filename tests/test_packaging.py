"""The package as a user installs it: metadata, data files shipped, platform markers, and imports
that never fail where a POSIX-only module or an optional library is missing. (.ci/run builds the
wheel, installs it into a fresh venv and runs the demo from there.)"""
from __future__ import annotations

import fnmatch
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

import elastofe

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

ROOT = Path(__file__).resolve().parents[1]
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))


def test_license_and_build_floor():
    project = PYPROJECT["project"]
    assert project["license"] == "MIT" and project["license-files"] == ["LICENSE"]
    text = (ROOT / "LICENSE").read_text(encoding="utf-8")
    assert text.startswith("MIT License") and "elastofe developers" in text
    # setuptools 77 is the first to take an SPDX expression in `license` (its changelog, v77.0.0).
    assert PYPROJECT["build-system"]["requires"] == ["setuptools>=77"]
    assert project["dynamic"] == ["version"]
    assert PYPROJECT["tool"]["setuptools"]["dynamic"]["version"] == {"attr": "elastofe.version.__version__"}


def test_each_dependency_listed_once():
    from packaging.requirements import Requirement

    names = [Requirement(r).name.lower() for r in PYPROJECT["project"]["dependencies"]]
    assert len(names) == len(set(names)), names


@pytest.mark.parametrize("system, machine, expected", [
    ("linux", "x86_64", True),
    ("win32", "AMD64", True),      # 64-bit Windows reports AMD64 (Python's platform.machine())
    ("darwin", "arm64", False),    # no MKL wheels for Apple silicon
    ("darwin", "x86_64", False),
    ("linux", "aarch64", False),
])
def test_pardiso_marker(system, machine, expected):
    from packaging.requirements import Requirement

    req = next(Requirement(r) for r in PYPROJECT["project"]["dependencies"] if r.startswith("pypardiso"))
    env = {"sys_platform": system, "platform_machine": machine, "python_version": "3.11"}
    assert req.marker.evaluate(env) is expected


def test_every_data_file_is_package_data():
    """Every non-Python file inside the package (demo part and cases, benchmark cases, the schema)
    matches a package-data pattern, so the wheel carries it."""
    patterns = PYPROJECT["tool"]["setuptools"]["package-data"]["elastofe"]
    pkg = ROOT / "elastofe"
    files = [p.relative_to(pkg).as_posix() for p in pkg.rglob("*")
             if p.is_file() and p.suffix not in (".py", ".pyc") and "__pycache__" not in p.parts
             and not p.name.startswith(".") and "-results" not in p.as_posix()]
    assert {"models/lever/lever.toml", "models/lever/lever.step", "case/case.schema.json"} <= set(files)
    missing = [f for f in files if not any(fnmatch.fnmatch(f, pat.replace("**/", "*")) for pat in patterns)]
    assert not missing, missing


def test_demo_case_ships_inside_the_package():
    case = elastofe.demo_case()
    assert case.is_file() and Path(elastofe.__file__).parent in case.parents
    parsed = elastofe.load_case(case)
    assert parsed.geometry.file.is_file()


def test_version_is_the_packages():
    import re

    text = (ROOT / "elastofe" / "version.py").read_text(encoding="utf-8")
    assert elastofe.__version__ == re.search(r'^__version__ = "([^"]+)"', text, re.M).group(1)


def test_imports_where_posix_modules_and_optional_libraries_are_missing():
    """As on Windows (no `resource`) and without PARDISO, MPI or CHOLMOD: every module imports."""
    code = textwrap.dedent("""
        import sys
        for name in ("resource", "pypardiso", "mpi4py", "petsc4py", "sksparse", "fcntl", "termios"):
            sys.modules[name] = None  # an import of it raises ImportError
        import importlib, pkgutil
        import elastofe
        bad = []
        for m in pkgutil.walk_packages(elastofe.__path__, "elastofe."):
            try:
                importlib.import_module(m.name)
            except Exception as err:
                bad.append(f"{m.name}: {type(err).__name__}: {err}")
        from elastofe.resources import peak_memory_mb
        from elastofe.solve import available_backends
        assert isinstance(peak_memory_mb(), float)
        assert "pardiso" not in available_backends() and "scipy" in available_backends()
        print("BAD" if bad else "OK", *bad, sep="\\n")
        """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "OK", out.stdout
