#!/usr/bin/env bash
# README's main command: install what is missing, build, and run the built-in
# demo campaign (jobs/demo/campaign.toml, an invented scenario) end to end:
# plan → run under mpiexec → status → one cone with its preview → covariance →
# Fisher forecasts compared across statistics and instruments → training set.
# Output goes to ./demo-out (override with SPINFLIP_DEMO_OUT); ranks default to
# the machine's cores (SPINFLIP_DEMO_RANKS). Running it again resumes the
# catalogue instead of starting over.
set -euo pipefail
here=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
"$here/deploy/install-debian.sh"
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
spinflip="${SPINFLIP_BUILD_DIR:-$here/build}/src/cli/spinflip"
campaign="$here/jobs/demo/campaign.toml"
out=${SPINFLIP_DEMO_OUT:-$PWD/demo-out}
ranks=${SPINFLIP_DEMO_RANKS:-$(nproc)}
mkdir -p "$out"
cd "$out"
step() { echo; echo "== $*"; }

"$spinflip" --version
step "validate the campaign: designs, entries, memory per rank"
"$spinflip" plan "$campaign" --points-csv "$out/points.csv"

step "run it on $ranks ranks (resumable: interrupt and run again to continue) -> $out/demo.h5"
mpiexec --oversubscribe -n "$ranks" "$spinflip" run "$campaign" -o "$out/demo.h5"
"$spinflip" status "$out/demo.h5" --require-complete

step "one light cone of the fiducial point, clean and observed, with its preview -> $out/cone.png"
fiducial=$(awk -F, 'NR > 1 && $3 == "fiducial" { print $1; exit }' "$out/points.csv")
"$spinflip" cone "$campaign" --point "${fiducial:-0}" --realisation 0 --fields x_hi \
    --scenario nextgen_1000h_wedge --scenario current_1000h_wedge -o "$out/cone.h5" --preview "$out/cone.png"

step "covariance of the fiducial realisations -> $out/covariance.h5 and its picture"
"$spinflip" covariance "$out/demo.h5" -o "$out/covariance.h5" \
    --select 'name=P(k) nextgen wedge;kernel=power;quantity=0;scenario=nextgen_1000h_wedge;every=2' \
    --select 'name=S1 nextgen wedge;kernel=scattering;order=1;scenario=nextgen_1000h_wedge;every=3'

# The Fisher comparison, one table per scenario: the same columns for each, so a new
# statistic is one more line in columns(). S2 keeps δ = l2 − l1 = 0 (l2=-1 is S1's); scattering
# leaves out the smallest scale j1 = 0, which the wedge scenarios empty (only rounding residue is left).
columns() {
    local s=$1
    printf '%s\n' \
        "--select" "name=P(k);kernel=power;quantity=0;scenario=$s;every=2" \
        "--select" "name=S1;kernel=scattering;order=1;j1=1:;scenario=$s;every=3" \
        "--select" "name=S1+S2;kernel=scattering;order=1,2;l2=-1,0;j1=1:;scenario=$s;every=5" \
        "--select" "name=P(k)+S1;kernel=power,scattering;quantity=0;order=1;j1=1:;scenario=$s;every=3" \
        "--select" "name=P(k)+S1+S2;kernel=power,scattering;quantity=0;order=1,2;l2=-1,0;j1=1:;scenario=$s;every=5"
}
step "Fisher forecasts: which statistic constrains the sources best, clean and under each instrument"
for s in clean nextgen_1000h nextgen_1000h_wedge current_1000h_wedge; do
    echo; echo "-- scenario $s"
    mapfile -t sel < <(columns "$s")
    extra=()
    # The cadence comparison: S1 of every slice against every third one (clean cone).
    [[ $s == clean ]] && extra=(--select "name=S1 every slice;kernel=scattering;order=1;j1=1:;scenario=$s;every=1")
    "$spinflip" fisher "$out/demo.h5" -o "$out/fisher_$s.h5" --combined "${sel[@]}" "${extra[@]}" \
        | tee "$out/fisher_$s.txt"
    # The table must come from invertible covariances: no inf, no negative Hartlap factor.
    if grep -Eq '\binf\b|Hartlap factor +\| *-' "$out/fisher_$s.txt"; then
        echo "demo: the Fisher table of $s holds inf or a negative Hartlap factor" >&2
        exit 1
    fi
done

step "training set for an emulator (split by design point) -> $out/train.h5"
"$spinflip" export "$out/demo.h5" -o "$out/train.h5" \
    --select 'name=nextgen wedge;kernel=power,scattering;quantity=0;order=1;scenario=nextgen_1000h_wedge;every=3'

step "a Slurm job chain for the same campaign -> $out/jobs"
"$spinflip" jobscript "$campaign" --walltime 01:00:00 --chain 4 -o "$out/jobs/" --catalogue "$out/demo.h5"

echo
echo "demo finished. Pictures: $(ls "$out"/*.png 2>/dev/null | tr '\n' ' ')"
echo "Catalogue: $out/demo.h5 (read it with python/spinflip_catalogue or h5py; layout in docs/catalogue.md)"
