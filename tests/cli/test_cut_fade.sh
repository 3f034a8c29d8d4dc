#!/usr/bin/env bash
# analyze --cut-fade-lengths (analysis/cut_tail.hpp): the shared Rhodes C3 note (tests/data/real-notes,
# cut 6 dB under its peak at 3.27 s) gets every last T60 at most 3 cut lengths by default and says how
# many parts it faded; with 0 nothing is faded and its slow late slopes stay (the slowest last T60 is
# longer than 3 cut lengths); bad values are refused with one line naming the option.
source "$(dirname "$0")/preamble.sh"
note="$src/tests/data/real-notes/rhodes_c3.wav"
# last_t60_max PATCH: the longest T60 among the partials' and bands' last segments (inf counts as 1e9).
last_t60_max() {
  awk '/^decay = /{ n = split($0, a, "t60_s = "); v = a[n]; sub(/[ ,}].*/, "", v); if (v == "inf") v = 1e9;
       if (v + 0 > m) m = v + 0 } END { print m }' "$1"
}
"$wane" analyze "$note" -o faded.toml >line.txt 2>err.txt || { echo "FAIL: analyze: $(cat err.txt)"; fail=1; }
cat line.txt
cut=$(awk -F' = ' '/^cut_s/{ print $2 }' faded.toml)
echo "cut_s $cut; longest last T60 with the fade $(last_t60_max faded.toml), without: see below"
check '[ -n "$cut" ]'
check 'grep -q "faded past it" line.txt && ! grep -q " 0 faded past it" line.txt'
check 'awk -v m="$(last_t60_max faded.toml)" -v c="$cut" "BEGIN { exit !(m <= 3 * c * 1.0001) }"'
"$wane" analyze "$note" -o kept.toml --cut-fade-lengths 0 >line0.txt 2>err.txt || { echo "FAIL: analyze 0: $(cat err.txt)"; fail=1; }
cat line0.txt
echo "longest last T60 without the fade: $(last_t60_max kept.toml)"
check 'grep -q " 0 faded past it" line0.txt'
check 'awk -v m="$(last_t60_max kept.toml)" -v c="$cut" "BEGIN { exit !(m > 3 * c) }"'
for bad in -1 nan 1001; do
  expect_error 2 "--cut-fade-lengths" "$wane" analyze "$note" -o bad.toml --cut-fade-lengths "$bad"
done
check '[ ! -e bad.toml ]'
exit $fail
