#!/usr/bin/env bash
# Install what is missing, build, and run the whole test suite (what CI runs).
#   deploy/test.sh                 # everything
#   deploy/test.sh -L unit         # extra arguments go to ctest (labels: unit mpi external slow slurm);
#                                  # then only that selection runs, without the hardening checks
# SPINFLIP_HARDENING=1 (and no arguments) adds the hardening checks after the suite
# (deploy/hardening.sh: sanitizer build of the unit and MPI tests, bounded fuzzing).
# They are opt-in until one whole sanitizer run has been verified on a 2-core CI
# machine within its time limit.
set -euo pipefail
here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
"$here/deploy/install-debian.sh"
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
cd "${SPINFLIP_BUILD_DIR:-$here/build}"
ctest --output-on-failure --timeout 900 -j "$(nproc 2>/dev/null || echo 2)" "$@"
if [ $# -eq 0 ] && [ "${SPINFLIP_HARDENING:-0}" = 1 ]; then
  "$here/deploy/hardening.sh"
fi
