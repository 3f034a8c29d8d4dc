#!/usr/bin/env bash
# An interrupted batch leaves complete files only and says so: `wane analyze` over 40 notes (made
# by sox, an independent generator) is sent SIGINT (then, in a second run, SIGTERM) once the first
# patch has appeared. Checks: exit code 128 + signal (130, 143), the one interrupt line on stderr,
# no temporary file left in the output folder, every patch left there parses (`wane info`), and
# every patch reported on stdout as written is there.
source "$(dirname "$0")/preamble.sh"
inputs=40
for i in $(seq 1 $inputs); do
  sox -n -r 48000 -b 24 "n$i.wav" synth 3 pluck $((100 + i * 10)) || { echo "FAIL: sox"; exit 1; }
done
expected_line='wane: interrupted; only the files reported as written are complete'

# run_and_signal SIGNAL EXPECTED_EXIT OUTDIR
run_and_signal() {
  local sig=$1 want=$2 out=$3
  "$wane" analyze n*.wav -o "$out" -j 2 >"$out.stdout" 2>"$out.stderr" &
  local pid=$!
  # Wait for the first finished patch (at most 30 s), then interrupt mid-batch.
  local waited=0
  while [ -z "$(ls "$out"/*.toml 2>/dev/null)" ] && [ $waited -lt 600 ] && kill -0 $pid 2>/dev/null; do
    sleep 0.05
    waited=$((waited + 1))
  done
  kill -"$sig" $pid
  wait $pid
  local rc=$?
  local done_count
  done_count=$(ls "$out"/*.toml 2>/dev/null | wc -l)
  echo "SIG$sig: exit $rc (want $want), $done_count of $inputs patches written, stderr: $(tr '\n' '|' < "$out.stderr")"
  [ "$rc" -eq "$want" ] || { echo "FAIL: SIG$sig: exit code $rc, expected $want"; fail=1; }
  [ "$done_count" -lt "$inputs" ] || { echo "FAIL: SIG$sig: the batch finished before the signal"; fail=1; }
  grep -qxF "$expected_line" "$out.stderr" || { echo "FAIL: SIG$sig: no interrupt line on stderr"; fail=1; }
  local leftovers
  leftovers=$(ls -A "$out" | grep -v '^n[0-9]*\.toml$')
  [ -z "$leftovers" ] || { echo "FAIL: SIG$sig: left in $out: $leftovers"; fail=1; }
  for f in "$out"/*.toml; do
    [ -e "$f" ] || continue
    "$wane" info "$f" >/dev/null 2>info.err || { echo "FAIL: SIG$sig: $f does not parse: $(cat info.err)"; fail=1; }
  done
  # Every patch reported as written ("IN -> OUT: ...") is complete.
  local reported=0
  while read -r line; do
    local f=${line#* -> }
    f=${f%%: *}
    reported=$((reported + 1))
    "$wane" info "$f" >/dev/null 2>info.err || { echo "FAIL: SIG$sig: reported $f does not parse"; fail=1; }
  done < <(grep ' -> ' "$out.stdout")
  echo "SIG$sig: $reported patches reported as written"
  [ "$reported" -ge 1 ] || { echo "FAIL: SIG$sig: no patch reported before the signal"; fail=1; }
}

run_and_signal INT 130 out_int
run_and_signal TERM 143 out_term
[ $fail -eq 0 ] && echo "PASS"
exit $fail
