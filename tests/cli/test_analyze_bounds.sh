#!/usr/bin/env bash
# Analysis bounds what it fits, noise bands included, and names the file in
# every error. A 3 s sine chirp from 100 Hz to 8 kHz (made by sox, an independent generator) once
# failed with "patch to write is invalid: noise 5: peak_db must be <= +24 dB": now it is analyzed
# (exit 0) and every peak_db in the patch is at most +24 dB; two notes in a row (sox plucks) are
# analyzed too. A recording with no partial to fit fails with exit 1 and a line naming the file.
source "$(dirname "$0")/preamble.sh"
sox -n -r 48000 -b 24 chirp.wav synth 3 sine 100-8000
sox -n -r 48000 -b 24 a.wav synth 1 pluck 220 && sox -n -r 48000 -b 24 b.wav synth 2 pluck 330 && sox a.wav b.wav two.wav
for f in chirp two; do
  "$wane" analyze $f.wav -o $f.toml >out.txt 2>err.txt; rc=$?
  echo "$f: exit $rc: $(cat out.txt err.txt)"
  [ $rc -eq 0 ] || { echo "FAIL: $f: exit $rc"; fail=1; continue; }
  max=$(awk -F' = ' '/^peak_db/ { if (m == "" || $2 + 0 > m) m = $2 + 0 } END { print m }' $f.toml)
  echo "$f: largest peak_db $max"
  awk -v m="$max" 'BEGIN { exit !(m <= 24) }' || { echo "FAIL: $f: peak_db $max over +24"; fail=1; }
done
sox -n -r 48000 -b 24 sweep.wav synth 2 sine 200-12000
"$wane" analyze sweep.wav -o sweep.toml >out.txt 2>err.txt; rc=$?
echo "sweep: exit $rc: $(cat err.txt)"
[ $rc -eq 1 ] && [ "$(wc -l <err.txt)" -eq 1 ] && grep -q '^wane: error: sweep.wav' err.txt || { echo "FAIL: sweep: the error does not name the file"; fail=1; }
[ $fail -eq 0 ] && echo "PASS"
exit $fail
