#!/usr/bin/env bash
# Independent read-back of our VTK XML output with VTK's own readers (PyPI package `vtk`).
# Creates .venv (ignored by git) if needed, installs the pinned vtk, writes the hand-made
# read-back cases and runs tests/vtk_readback.py on each.
# Usage: .ci/vtk-check.sh [OUT_DIR]
set -euo pipefail
cd "$(dirname "$0")/.."
VTK_VERSION=9.5.2
if [ ! -x .venv/bin/python ]; then
    python3 -m venv .venv
fi
if ! .venv/bin/python -c "import vtkmodules, sys; sys.exit(0 if vtkmodules.__version__ == '$VTK_VERSION' else 1)" 2>/dev/null; then
    .venv/bin/pip install --quiet "vtk==$VTK_VERSION"
fi
out="${1:-$(mktemp -d)}"
cargo run --quiet --locked -p octocut-writers --example readback_cases -- "$out" >/dev/null
# real meshes: both demo scenarios (the drone's dirty export; the rooftop unit cut by the floor)
cargo build --quiet --locked -p octocut-cli
bin=target/debug/octocut
"$bin" mesh demo-geometry/drone.toml --out "$out/drone" --quiet
.venv/bin/python .ci/expected-from-report.py "$out/drone" body arms hubs skids pod \
    inflow outflow side_windward side_leeward bottom top
"$bin" mesh demo-geometry/rooftop.toml --out "$out/rooftop" --quiet
.venv/bin/python .ci/expected-from-report.py "$out/rooftop"
.venv/bin/python tests/vtk_readback.py "$out"/*/
