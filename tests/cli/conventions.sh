#!/usr/bin/env bash
# Command-line conventions (issue 19): no verb is a usage error (stderr, exit 2);
# an unknown verb gets a suggestion; -q/-v are accepted before or after the
# verb; help shows defaults and files written, without CLI11 artefacts.
set -u
spinflip=$1
fail() { echo "FAIL: $*"; exit 1; }
tmp=$(mktemp -d); trap 'rm -rf "$tmp"' EXIT

"$spinflip" >"$tmp/out" 2>"$tmp/err"; status=$?
[ $status -eq 2 ] || fail "no verb: exit $status, expected 2"
[ ! -s "$tmp/out" ] || fail "no verb: usage went to stdout"
grep -q "no verb given" "$tmp/err" && grep -q "run" "$tmp/err" || fail "no verb: stderr lacks the usage: $(cat "$tmp/err")"

err=$("$spinflip" runn 2>&1 >/dev/null); status=$?
[ $status -eq 2 ] || fail "unknown verb: exit $status"
[ "$(wc -l <<<"$err")" -eq 1 ] || fail "unknown verb: not one line: $err"
grep -q "unknown verb 'runn' (did you mean 'run'?)" <<<"$err" || fail "unknown verb: no suggestion: $err"
err=$("$spinflip" zzzzzz 2>&1 >/dev/null)
grep -q "unknown verb 'zzzzzz'" <<<"$err" && ! grep -q "did you mean" <<<"$err" || fail "far verb: $err"

for args in "-q config --list" "config --list -q" "config -v --list" "-v config --list"; do
  # shellcheck disable=SC2086
  "$spinflip" $args >/dev/null 2>"$tmp/err" || fail "'spinflip $args' refused: $(cat "$tmp/err")"
done

for verb in covariance fisher export measure cone run plan jobscript; do
  help=$("$spinflip" "$verb" --help 2>&1) || fail "$verb --help failed"
  grep -q "{false}\|{true}" <<<"$help" && fail "$verb --help shows a CLI11 default artefact: $(grep -m1 '{false}\|{true}' <<<"$help")"
done
for pair in covariance:covariance.h5 fisher:fisher.h5 export:train.h5; do
  "$spinflip" "${pair%%:*}" --help | grep -q "default: ${pair#*:}" || fail "${pair%%:*} --help does not say it writes ${pair#*:}"
done
"$spinflip" covariance --help | grep -q "_corr.png" || fail "covariance --help does not name its picture"
"$spinflip" run --help | grep -q "progress.json" || fail "run --help does not name the progress file"
"$spinflip" jobscript --help | grep -q -- "-o,--output" || fail "jobscript: -o is not --output"
echo "cli conventions: ok"
