#!/usr/bin/env bash
# An interrupted keymap leaves no temporary. `wane keymap` into a folder that
# already holds a complete set is sent SIGINT, SIGTERM or SIGHUP (in turn) 20 times, at moments
# spread over the run (after 1 to 20 of the new WAVs exist in the staging folder, or before any).
# Checks each time: exit 128 + signal, no hidden temporary or staging folder anywhere under the
# output folder, and the folder holds either exactly the previous set, byte for byte (cmp), or,
# when the signal came during the final move (signals are held back then), every WAV of the new
# set: never a mix.
source "$(dirname "$0")/preamble.sh"
runs=20
patch="$src/patches/steel-pluck.toml"
args=(--notes C2..C6 --layers 2 --rate 16000 --bits 16 --threads 2)
"$wane" -q keymap "$patch" -o set "${args[@]}" || { echo "FAIL: first keymap"; exit 1; }
cp -a set reference
files=$(ls set | wc -l)
echo "previous set: $files files"
signals=(INT TERM HUP)
codes=(130 143 129)
for i in $(seq 1 $runs); do
  k=$(( (i - 1) % 3 ))
  sig=${signals[$k]} want=${codes[$k]}
  # The new set differs from the old one (another seed), so a mixed folder would show.
  "$wane" keymap "$patch" -o set "${args[@]}" --seed $((i + 1)) --detune-cents 3 >run.out 2>run.err &
  pid=$!
  target=$(( i - 1 ))   # new WAVs to wait for in the staging folder (0: signal at once)
  waited=0
  while [ "$target" -gt 0 ] && [ "$waited" -lt 400 ] && kill -0 $pid 2>/dev/null; do
    n=$(find set -path 'set/.wane-set.*' -name '*.wav' 2>/dev/null | wc -l)
    [ "$n" -ge "$target" ] && break
    sleep 0.01
    waited=$((waited + 1))
  done
  kill -"$sig" $pid 2>/dev/null
  wait $pid
  rc=$?
  left=$(find set -name '.*' | tr '\n' ' ')
  echo "run $i SIG$sig after $target new files: exit $rc (want $want, or 0 if it finished first); left: '${left}'"
  if [ -n "$left" ]; then echo "FAIL: run $i: temporaries left: $left"; fail=1; fi
  if [ "$rc" -eq "$want" ]; then
    # All or nothing: every WAV as before, or (the signal came while the finished set was moved in,
    # which holds signals back until it is done) every WAV new; never a mix.
    same=0 changed=0
    for f in reference/*.wav; do
      if cmp -s "$f" "set/${f#reference/}"; then same=$((same + 1)); else changed=$((changed + 1)); fi
    done
    [ "$(ls set)" = "$(ls reference)" ] || { echo "FAIL: run $i: the file list changed"; fail=1; }
    if [ $changed -gt 0 ] && [ $same -gt 0 ]; then
      echo "FAIL: run $i: a mixed set: $same WAVs as before, $changed changed"; fail=1
    elif [ $changed -gt 0 ]; then
      echo "run $i: the signal came during the final move; the new set is complete ($changed WAVs new)"
      rm -rf reference && cp -a set reference
    fi
  elif [ "$rc" -eq 0 ]; then
    echo "run $i finished before the signal; taking its set as the reference"
    rm -rf reference && cp -a set reference
  else
    echo "FAIL: run $i: exit $rc"; cat run.err; fail=1
  fi
done
[ $fail -eq 0 ] && echo "PASS"
exit $fail
