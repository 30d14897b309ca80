#!/usr/bin/env bash
# README's main command: install what is missing, build, and run what spinflip
# can do today on the built-in demo campaign (jobs/demo/campaign.toml).
# Output goes to ./demo-out (override with SPINFLIP_DEMO_OUT).
set -euo pipefail
here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
"$here/deploy/install-debian.sh"
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
spinflip="${SPINFLIP_BUILD_DIR:-$here/build}/src/cli/spinflip"
out=${SPINFLIP_DEMO_OUT:-$PWD/demo-out}
mkdir -p "$out"
"$spinflip" --version
echo "== configuration reference (every key, default, unit) -> $out/config-reference.md"
"$spinflip" config --markdown > "$out/config-reference.md"
"$spinflip" config --list
echo "== a Slurm job chain for the demo campaign -> $out/jobs"
"$spinflip" jobscript "$here/jobs/demo/campaign.toml" --walltime 01:00:00 --chain 4 --output "$out/jobs"
echo "demo finished: see $out"
