#!/usr/bin/env bash
# Run one libFuzzer target for a bounded time:  run_fuzz.sh BINARY CORPUS WORK SECONDS
# CORPUS (in the repository) is read only; new inputs go to WORK. A finding
# (crash, sanitizer report, internal error, several-line message, a single
# input over 10 s, over 2 GB) fails with the input saved under WORK and its
# path printed; replay it with `BINARY FILE`.
set -uo pipefail
bin=$1 corpus=$2 work=$3 seconds=$4
mkdir -p "$work/new" "$work/findings"
# detect_leaks=0: OpenMPI and HDF5 keep allocations for the process's life;
# leaks in our readers show as growth under -rss_limit_mb instead.
export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=0:abort_on_error=1}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
"$bin" "$work/new" "$corpus" -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -malloc_limit_mb=1024 \
  -artifact_prefix="$work/findings/" -print_final_stats=1 >"$work/log.txt" 2>&1
status=$?
tail -n 15 "$work/log.txt"
if [ $status -ne 0 ]; then
  echo "fuzz: $(basename "$bin") found a problem (exit $status); inputs: $(ls "$work/findings" | tr '\n' ' ')"
  exit 1
fi
echo "fuzz: $(basename "$bin") ran ${seconds}s without a finding"
