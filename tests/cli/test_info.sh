#!/usr/bin/env bash
# wane info: prints the note summary and the partial table of an example patch; a broken patch
# exits 1 with one "wane: error:" line naming file:line:col; an unknown key warns and goes on.
# Python's tomllib (an independent TOML parser) cross-checks the partial counts when present.
source "$(dirname "$0")/preamble.sh"

pluck="$src/patches/steel-pluck.toml"
"$wane" info "$pluck" >out.txt 2>err.txt; rc=$?
cat out.txt
check '[ $rc -eq 0 ]'
check '[ ! -s err.txt ]'
# Values from the file (partial 4: freq_hz 587.604770, peak -21.04 dB, T60 4.44 s; partial 1 has
# two segments, 4.19 s to 0.6 s then 7.62 s) and the summary (D3 = MIDI 50, 12 partials, 2 bands).
check 'grep -q "146.832384 Hz = D3 +0.0 cents (MIDI 50)" out.txt'
check 'grep -q "12 partials, 2 noise bands" out.txt'
check 'grep -Eq "^ +4 +4 +587\.604770 +[-+][0-9.]+ +-21\.04 +1\.00  4\.440 s to end$" out.txt'
check 'grep -Eq "^ +1 +1 +146\.817095 .* 4\.190 s to 0\.600 s, 7\.620 s to end$" out.txt'
check 'grep -q "4.0000e-05" out.txt'
check 'grep -q "24-bit mono WAV" out.txt'
longest=$(awk '{ if (length($0) > m) m = length($0) } END { print m }' out.txt)
echo "longest line: $longest columns"
check '[ "$longest" -le 100 ]'

# Every example: wane info runs cleanly, and its counts match Python's tomllib (one interpreter
# start for all files; skipped where tomllib is missing).
have_tomllib=0
python3 -c "import tomllib" 2>/dev/null && have_tomllib=1
if [ $have_tomllib -eq 1 ]; then
  python3 - "$src"/patches/*.toml >tomllib.txt <<'PY'
import sys, tomllib
for path in sys.argv[1:]:
    d = tomllib.load(open(path, "rb"))
    print(path, len(d.get("partial", [])), len(d.get("noise", [])))
PY
fi
for f in "$src"/patches/*.toml; do
  "$wane" info "$f" >one.txt 2>one_err.txt || { echo "FAIL: wane info $f"; fail=1; }
  check '[ ! -s one_err.txt ]'
  if [ $have_tomllib -eq 1 ]; then
    want=$(grep -F "$f " tomllib.txt | cut -d' ' -f2-)
    got=$(sed -nE 's/^  content +([0-9]+) partials?, ([0-9]+) noise bands?$/\1 \2/p' one.txt)
    echo "$(basename "$f"): tomllib counts '$want', wane info '$got'"
    check '[ -n "$want" ] && [ "$want" = "$got" ]'
  fi
done

# A broken patch: partial 2's first T60 set to 0. Find its line and the column of its value.
cp "$pluck" broken.toml
line=$(grep -n "^decay = " broken.toml | sed -n 2p | cut -d: -f1)
sed -i "${line}s/t60_s = [0-9.]*/t60_s = 0/" broken.toml
col=$(sed -n "${line}p" broken.toml | awk '{ print index($0, "t60_s = 0") + 8 }')
"$wane" info broken.toml >out2.txt 2>err2.txt; rc=$?
cat err2.txt
check '[ $rc -eq 1 ]'
check '[ "$(wc -l <err2.txt)" -eq 1 ]'
check 'grep -q "^wane: error: broken.toml:$line:$col: partial 2: decay\[1\].t60_s must not be 0" err2.txt'

# A misspelt optional key warns with its position and the nearest key, and info still runs.
sed "s/^gain_db = /gian_db = /" "$pluck" >typo.toml
tline=$(grep -n "^gian_db" typo.toml | cut -d: -f1)
"$wane" info typo.toml >out3.txt 2>err3.txt; rc=$?
cat err3.txt
check '[ $rc -eq 0 ]'
check 'grep -q "^wane: warning: typo.toml:$tline:1: note: unknown key .gian_db. (did you mean .gain_db.?)" err3.txt'

# The worked edit of patches/README.md: partial 3's tail T60 doubled shows in the table.
sed "s/{ t60_s = 5.5200 }/{ t60_s = 11.0400 }/" "$pluck" >edited.toml
"$wane" info edited.toml >out5.txt 2>&1
check 'grep -Eq "^ +3 +3 +440\.651789 .* 3\.030 s to 0\.600 s, 11\.040 s to end$" out5.txt'

# Not a patch at all.
printf 'hello = 1\n' >not.toml
"$wane" info not.toml >/dev/null 2>err4.txt; rc=$?
cat err4.txt
check '[ $rc -eq 1 ]'
check 'grep -q "^wane: error: not.toml:1:1: not a wane patch" err4.txt'
exit $fail
