#!/bin/bash
# spinflip jobscript as a user meets it: writes a script, refuses bad input with
# exit 2 and one line. Usage: cli_check.sh SPINFLIP SOURCE_DIR
set -u
spinflip=$1
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
dir="$tmp/it's a \"dir\" \$(touch $tmp/pwned)"
mkdir -p "$dir"
printf '[campaign]\nseed = 1\n' > "$dir/camp.toml"
fail() { echo "FAIL: $*"; exit 1; }

cd "$tmp" || exit 1
out=$("$spinflip" jobscript "$dir/camp.toml" --walltime 00:10:00 --chain 3 -o "$dir/jobs/" \
      --env-setup 'echo "env $(echo ok)"' --after 'echo analysis') || fail "jobscript refused a good request: $out"
[ -f "$dir/jobs/camp.slurm" ] || fail "no script written: $out"
bash -n "$dir/jobs/camp.slurm" || fail "slurm script has a syntax error"
[ -e "$tmp/pwned" ] && fail "a path was interpolated into a shell"
"$spinflip" jobscript "$dir/camp.toml" --scheduler pbs --walltime 00:10:00 -o "$dir/jobs/" >/dev/null \
  || fail "pbs refused"
bash -n "$dir/jobs/camp.pbs" || fail "pbs script has a syntax error"

refuse() {  # refuse "what" args...: exit 2 and a one-line message naming the option
  local what=$1; shift
  local err
  err=$("$spinflip" jobscript "$dir/camp.toml" -o "$dir/jobs/" "$@" 2>&1 >/dev/null)
  local rc=$?
  [ "$rc" -eq 2 ] || fail "$what: exit $rc, expected 2 ($err)"
  [ "$(printf '%s\n' "$err" | wc -l)" -eq 1 ] || fail "$what: message is not one line: $err"
  printf '%s' "$err" | grep -q -- "$what" || fail "message does not name $what: $err"
}
refuse --walltime --walltime 1:00
refuse --walltime --walltime 00:00:30
refuse --chain --chain 0
refuse --account --account '$(touch /tmp/pwned)'
refuse --scheduler --scheduler lsf
refuse --signal-lead-seconds --walltime 00:02:00 --signal-lead-seconds 120
refuse --group-size --ranks-per-node 3 --group-size 2
refuse --env-setup --env-setup x --spack-env /tmp
[ -e "$tmp/pwned" ] && fail "an account was interpolated into a shell"
"$spinflip" jobscript "$tmp/none.toml" >/dev/null 2>&1; [ $? -eq 2 ] || fail "missing campaign not exit 2"
echo "jobscript cli checks passed"
