#!/usr/bin/env bash
# Install the distributed engine for `--solver petsc`: the distribution's PETSc and Open MPI,
# then mpi4py and petsc4py (pinned to the installed PETSc's major.minor, compiled against it)
# into elastofe's Python environment.
#
#   scripts/install-mpi.sh [PYTHON]     PYTHON defaults to ./.venv/bin/python, else python3
#
# Debian/Ubuntu, as root (or with sudo). Takes about three minutes on a fresh machine.
# Skips every step that is already done, so it is safe to call again.
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
py="${1:-}"
if [ -z "$py" ]; then
  if [ -x "$here/.venv/bin/python" ]; then py="$here/.venv/bin/python"; else py="python3"; fi
fi
say() { printf 'install-mpi: %s\n' "$*" >&2; }
die() { say "$*"; exit 1; }
t0=$SECONDS

sudo=""
if [ "$(id -u)" != 0 ]; then
  command -v sudo >/dev/null 2>&1 || die "run as root or install sudo"
  sudo="sudo"
fi

# 1. PETSc (real scalars, 32-bit indices) and Open MPI from the distribution.
pkgs="petsc-dev libopenmpi-dev openmpi-bin pkg-config"
if ! pkg-config --exists PETSc 2>/dev/null || ! command -v mpiexec >/dev/null 2>&1; then
  command -v apt-get >/dev/null 2>&1 || die "apt-get not found: install PETSc and Open MPI with your system's package manager"
  say "apt-get install $pkgs ..."
  $sudo apt-get -o DPkg::Lock::Timeout=900 update -qq
  DEBIAN_FRONTEND=noninteractive $sudo apt-get -o DPkg::Lock::Timeout=900 install -y -qq --no-install-recommends $pkgs \
    build-essential >/dev/null
fi
petsc_version="$(pkg-config --modversion PETSc)"
petsc_mm="$(echo "$petsc_version" | cut -d. -f1,2)"
# PETSC_DIR is the prefix that holds include/petsc.h and lib/libpetsc*: Debian puts it under
# /usr/lib/petscdir/petsc<ver>/<arch> (with /usr/lib/petsc as a link); pkg-config's prefix says where.
petsc_dir="$(pkg-config --variable=prefix PETSc)"
petsc_dir="$(readlink -f "$petsc_dir")"
[ -f "$petsc_dir/include/petsc.h" ] || die "PETSc headers not found under $petsc_dir (from pkg-config)"
say "PETSc $petsc_version at $petsc_dir"

# 2. mpi4py and petsc4py into the Python environment. petsc4py compiles against Python's headers.
if ! "$py" -c "import sysconfig, os, sys; sys.exit(0 if os.path.exists(os.path.join(sysconfig.get_paths()['include'], 'Python.h')) else 1)"; then
  say "Python headers missing for $py: apt-get install python3-dev"
  DEBIAN_FRONTEND=noninteractive $sudo apt-get -o DPkg::Lock::Timeout=900 install -y -qq python3-dev >/dev/null
fi
if "$py" -c "import mpi4py, petsc4py; petsc4py.init(); from petsc4py import PETSc; \
  import sys; v = PETSc.Sys.getVersion(); sys.exit(0 if '%d.%d' % v[:2] == '$petsc_mm' else 1)" 2>/dev/null; then
  say "mpi4py and petsc4py already installed for $py"
else
  "$py" -m pip install -q --upgrade pip >&2
  # Build tools first, so that --no-build-isolation builds against this environment's numpy.
  "$py" -m pip install -q numpy setuptools wheel "cython<3.1" >&2
  say "pip install mpi4py ..."
  "$py" -m pip install -q --no-cache-dir mpi4py >&2
  # Pinned to the installed PETSc: an unpinned petsc4py would download and compile PETSc itself.
  say "pip install petsc4py==$petsc_mm.* against $petsc_dir ..."
  # -O1 -g0 after PETSc's own "-g -O2": the wrapper is one very large generated C file, and without
  # debug information and heavy optimisation it compiles 3.3x faster (1.1 against 3.8 CPU minutes
  # measured); the numerical work runs in libpetsc, compiled by the distribution, not in it.
  CFLAGS="${CFLAGS:--O1 -g0}" PETSC_DIR="$petsc_dir" PETSC_ARCH="" "$py" -m pip install -q --no-cache-dir --no-build-isolation \
    "petsc4py==$petsc_mm.*" >&2
fi
"$py" - <<'PY'
import mpi4py, petsc4py
petsc4py.init()
from petsc4py import PETSc
print("install-mpi: petsc4py", petsc4py.__version__, "on PETSc", ".".join(map(str, PETSc.Sys.getVersion())),
      "mpi4py", mpi4py.__version__)
PY
say "done in $((SECONDS - t0)) s"
