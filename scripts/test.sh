#!/usr/bin/env bash
# Runs the whole test suite on a fresh machine: installs the independent VTK readers the
# tests use (into a private virtual environment under target/), then runs cargo test.
set -euo pipefail
cd "$(dirname "$0")/.."

venv=target/pyreaders
if ! "$venv/bin/python" -c "import vtk, meshio" 2>/dev/null; then
    echo "== installing the VTK readers used by the tests (vtk, meshio) into $venv"
    mkdir -p target
    python3 -m venv "$venv"
    "$venv/bin/pip" install --quiet --disable-pip-version-check "vtk==9.7.2" "meshio==5.3.5"
fi
export AGARIUM_PYTHON="$PWD/$venv/bin/python"

echo "== cargo test --workspace"
cargo test --workspace --all-targets "$@"
