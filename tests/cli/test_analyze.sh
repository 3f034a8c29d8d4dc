#!/usr/bin/env bash
# wane analyze end to end on notes made by sox (an independent generator): one input writes one
# patch; a folder of inputs with one corrupt file writes every good patch, names the bad file on
# one error line and exits 1; bad options exit 2 naming the option; an output equal to an input
# is refused.
source "$(dirname "$0")/preamble.sh"
mkdir -p in

sox -n -r 48000 -b 24 in/a220.wav synth 3 pluck 220 || { echo "FAIL: sox"; exit 1; }
sox -n -r 48000 -b 24 in/b330.wav synth 3 pluck 330 || { echo "FAIL: sox"; exit 1; }
sox -n -r 44100 -b 16 in/c110.wav synth 2 pluck 110 || { echo "FAIL: sox"; exit 1; }
# Corrupt: a real WAV header followed by too few bytes for the frames it claims.
head -c 2000 in/b330.wav > in/corrupt.wav

# One input, one patch file.
"$wane" analyze in/a220.wav -o one.toml >out.txt 2>err.txt; rc=$?
echo "one input: exit $rc: $(cat out.txt) $(cat err.txt)"
check '[ $rc -eq 0 ]'
check '[ -s one.toml ]'
check 'grep -q "^format = \"wane-patch\"" one.toml'
check 'grep -q "^\[\[partial\]\]" one.toml'
check 'grep -q "partials, .* segments, fit error .* dB, [0-9]* bytes" out.txt'
# The summary's byte count is the file's size.
bytes=$(sed -n 's/.* \([0-9]*\) bytes$/\1/p' out.txt)
check '[ "$bytes" = "$(stat -c %s one.toml)" ]'

# A folder with one corrupt file: all good patches written, exit 1, one line naming the bad one.
"$wane" analyze in/*.wav -o patches >out.txt 2>err.txt; rc=$?
echo "folder: exit $rc"; cat out.txt err.txt
check '[ $rc -eq 1 ]'
check '[ -s patches/a220.toml ] && [ -s patches/b330.toml ] && [ -s patches/c110.toml ]'
check '[ ! -e patches/corrupt.toml ]'
check '[ $(grep -c "^wane: error: " err.txt) -eq 1 ]'
check 'grep -q "^wane: error: .*in/corrupt.wav" err.txt'
check '[ $(wc -l < out.txt) -eq 3 ]'
if ls -A patches | grep -q '\.tmp$'; then echo "FAIL: temporary file left in patches"; fail=1; fi
# The same files analyzed one at a time give the same patches (parallel runs are independent).
"$wane" analyze in/b330.wav -o b330_alone.toml >/dev/null 2>&1
check 'cmp -s b330_alone.toml patches/b330.toml'

# Bad options: exit 2, one line naming the option.
for args in "--max-segments 0" "--max-partials 0" "--fft-size 17" "--f0 -5" "--hop-s 0" "--window-s -1" \
            "--channel 0" "--start-s 2 --end-s 1"; do
  opt=$(echo "$args" | awk '{print $NF == "" ? $1 : $(NF-1)}')
  "$wane" analyze in/a220.wav -o x.toml $args >/dev/null 2>err.txt; rc=$?
  echo "$args: exit $rc: $(cat err.txt)"
  check '[ $rc -eq 2 ]'
  check 'grep -q -- "^wane: error: .*$opt" err.txt'
  check '[ ! -e x.toml ]'
done
# --name with several inputs is a usage error.
"$wane" analyze in/a220.wav in/b330.wav -o y --name z >/dev/null 2>err.txt; rc=$?
check '[ $rc -eq 2 ]'

# An output equal to an input is refused and the input left alone.
cp in/a220.wav same.wav
before=$(md5sum < same.wav)
"$wane" analyze same.wav -o same.wav >/dev/null 2>err.txt; rc=$?
echo "same: exit $rc: $(cat err.txt)"
check '[ $rc -eq 1 ]'
check 'grep -q "overwrite the input" err.txt'
check '[ "$(md5sum < same.wav)" = "$before" ]'

exit $fail
