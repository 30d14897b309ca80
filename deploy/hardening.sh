#!/usr/bin/env bash
# Hardening checks (what CI runs after the main suite; DEVELOPERS.md):
#  1. a sanitizer build, AddressSanitizer + UndefinedBehaviorSanitizer, with
#     clang 16 in its own folder, running the unit and MPI tests;
#  2. the libFuzzer targets of tests/fuzz (same build), each for a bounded time
#     from the corpus kept in tests/fuzz/corpus/.
#   deploy/hardening.sh                      # both
#   SPINFLIP_FUZZ_SECONDS=300 deploy/hardening.sh -L fuzz   # longer fuzzing only
# Extra arguments go to ctest. Packages come from deploy/install-debian.sh.
set -euo pipefail
here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
build=${SPINFLIP_HARDENING_DIR:-$here/build-hardening}
seconds=${SPINFLIP_FUZZ_SECONDS:-40}
command -v clang++-16 >/dev/null || { echo "spinflip hardening: clang++-16 missing: run deploy/install-debian.sh"; exit 2; }

# -O1 -g: readable sanitizer reports at a fraction of -O0's run time. NDEBUG as in
# the Release build users run: toml++ 3.3.0 has a debug-only assertion that a
# malformed key at the end of a file reaches (its release code reports a parse error).
CC=clang-16 CXX=clang++-16 cmake -S "$here" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo \
  -DCMAKE_C_FLAGS_RELWITHDEBINFO="-O1 -g -DNDEBUG" -DCMAKE_CXX_FLAGS_RELWITHDEBINFO="-O1 -g -DNDEBUG" \
  -DSPINFLIP_SANITIZE=address,undefined -DSPINFLIP_FUZZ=ON -DSPINFLIP_BUILD_BENCH=OFF \
  -DSPINFLIP_FUZZ_SECONDS="$seconds" >/dev/null
cmake --build "$build" -j "$(nproc 2>/dev/null || echo 2)"

export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
# Leak checking is off: OpenMPI, PMIx, hwloc and HDF5 keep allocations made at
# MPI_Init/H5open until exit by design, and LeakSanitizer reports them as leaks
# in libraries this project does not own (measured: 122,528 bytes in 3,364
# allocations per rank, from libmpi/libopen-pal, for test_core_collective). Use-after-free,
# overflows and undefined behaviour are still fatal (halt_on_error).
export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=0:abort_on_error=1:strict_string_checks=1}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
cd "$build"
if [ $# -eq 0 ]; then
  # unit + mpi (their Python end-to-end checks included) and fuzz; the slow
  # cross-library comparisons (external) and the Slurm tests run in the main suite.
  set -- -L "unit|mpi|fuzz" -LE "external|slow|slurm"
fi
ctest --output-on-failure --timeout 900 -j "$(nproc 2>/dev/null || echo 2)" "$@"
