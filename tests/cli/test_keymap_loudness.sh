#!/usr/bin/env bash
# The +40 dB rule in keymap and report as in render. A patch whose rising segment takes it to
# about +240 dBFS, and one whose level overflows to infinity, are refused by keymap (exit 1, one
# error line with the peak or "non-finite", no folder left) instead of being scaled by -240 dB or
# failing on a NaN sample; a patch 6 dB over full scale is still scaled by one common gain (exit 0,
# a warning naming the gain) and the loudest WAV then peaks at -1 dBFS as sox measures it.
source "$(dirname "$0")/preamble.sh"
write_patch() { write_test_pluck "$1.toml" "$1" 2.0 "$2 0.002 [ { t60_s = $3 } ]"; }  # NAME PEAK_DB T60_S
write_patch rising 0.0 -0.5       # +60 dB per 0.5 s for 2 s: about +240 dBFS at the end
write_patch overflow 0.0 -0.0001  # rises past the largest float
write_patch hot 6.0 2.0           # +6 dBFS at the peak
for name in rising overflow; do
  "$wane" keymap $name.toml -o set-$name --notes C3..C4 >out.txt 2>err.txt; rc=$?
  echo "$name: exit $rc: $(cat err.txt)"
  [ $rc -eq 1 ] || { echo "FAIL: $name: exit $rc, want 1"; fail=1; }
  [ "$(wc -l <err.txt)" -eq 1 ] || { echo "FAIL: $name: not one line"; fail=1; }
  grep -q '^wane: error: .*more than 40 dB over full scale' err.txt || { echo "FAIL: $name: message"; fail=1; }
  [ ! -e set-$name ] || { echo "FAIL: $name: set-$name left: $(ls -A set-$name | head -3)"; fail=1; }
done
grep -q 'non-finite' <("$wane" keymap overflow.toml -o set-overflow --notes C3..C4 2>&1) || { echo "FAIL: overflow not called non-finite"; fail=1; }
grep -q '+2[34][0-9]\.[0-9][0-9] dBFS' <("$wane" keymap rising.toml -o set-rising --notes C3..C4 2>&1) || { echo "FAIL: rising: peak not named"; fail=1; }
"$wane" keymap hot.toml -o set-hot --notes C3..C4 >out.txt 2>err.txt; rc=$?
echo "hot: exit $rc: $(cat err.txt)"
[ $rc -eq 0 ] && grep -q 'common gain of -7' err.txt || { echo "FAIL: hot: not scaled by a common gain"; fail=1; }
loudest=$(for f in set-hot/*.wav; do sox "$f" -n stat 2>&1 | awk '/(Maximum|Minimum) amplitude/ { v = $3 < 0 ? -$3 : $3; if (v > m) m = v } END { print m }'; done | sort -g | tail -1)
peak_db=$(awk -v a="$loudest" 'BEGIN { printf "%.2f", 20 * log(a) / log(10) }')
echo "hot: loudest sample $loudest = $peak_db dBFS (sox stat), want -1.00 +- 0.01"
awk -v p="$peak_db" 'BEGIN { exit !(p > -1.01 && p < -0.99) }' || { echo "FAIL: hot: peak $peak_db dBFS"; fail=1; }
# The same rule in report, which renders the patch to compare it with its source.
sox -n -r 48000 -b 16 source.wav synth 2 sine 220 vol 0.5 || { echo "FAIL: sox"; fail=1; }
for name in rising overflow; do
  "$wane" report source.wav $name.toml -o report-$name.html >out.txt 2>err.txt; rc=$?
  echo "report $name: exit $rc: $(cat err.txt)"
  [ $rc -eq 1 ] || { echo "FAIL: report $name: exit $rc, want 1"; fail=1; }
  grep -q '^wane: error: .*more than 40 dB over full scale' err.txt || { echo "FAIL: report $name: message"; fail=1; }
  [ ! -e report-$name.html ] || { echo "FAIL: report $name: page written"; fail=1; }
done
[ $fail -eq 0 ] && echo "PASS"
exit $fail
