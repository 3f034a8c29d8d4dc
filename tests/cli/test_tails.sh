#!/usr/bin/env bash
# Tails from the command line: render and keymap take --length-s or --until-db (bad values refused
# with one error line, nothing written; keymap applies them to every file), a render past the
# patch's length continues every decay (sox measures the level), analyze says when a recording was
# cut while sounding (a pluck made by sox's synth, cut at 1 s; its copy keeps falling past the cut)
# and when a tone holds (sines made by sox), and the held tone renders on at its held level.
source "$(dirname "$0")/preamble.sh"
length_of() { sox --i -D "$1"; }
rms_db() { sox "$1" -n trim "$2" "$3" stat 2>&1 | awk '/RMS +amplitude/ { print 20 * log($3) / log(10) }'; }

write_test_pluck pluck.toml "tails pluck" 0.5 "-12.0 0.004 [ { t60_s = 1.9, until_s = 0.2 }, { t60_s = 6.4 } ]" \
  "-18.0 0.004 [ { t60_s = 1.2 } ]"

# 1. --length-s: a render longer than the patch continues the decay. By the envelope's definition
# partial 1 is at -12 - 60 x 0.196 / 1.9 = -18.19 dB at 0.2 s, then falls 60 / 6.4 = 9.375 dB/s;
# over 2.5 .. 2.9 s (partial 2 is below -140 dB there) its RMS is the peak level - 3.01 dB at the
# middle, 2.7 s, within 0.2 dB (a 3.75 dB linear ramp in dB over the stretch).
"$wane" -q render pluck.toml -o long.wav --length-s 3 --bits 32f
check 'near "$(length_of long.wav)" 3.0 0.0001'
want=$(awk 'BEGIN { print -12 - 60 * 0.196 / 1.9 - 9.375 * 2.5 - 3.0103 }')
got=$(rms_db long.wav 2.5 0.4)
echo "RMS over 2.5-2.9 s: $got dB, by the definition $want dB"
check 'near "$got" "$want" 0.2'

# 2. --until-db -60: every partial 60 dB below the loudest peak (-72 dB). Partial 1 reaches it at
# 0.2 + (72 - 18.19) / 9.375 s, partial 2 at 0.004 + 54 / 50 s; the render adds the 10 ms end fade.
"$wane" -q render pluck.toml -o until.wav --until-db -60 --bits 32f
want=$(awk 'BEGIN { print 0.2 + (72 - 12 - 60 * 0.196 / 1.9) / 9.375 + 0.010 }')
echo "--until-db -60: $(length_of until.wav) s, by the definition $want s"
check 'near "$(length_of until.wav)" "$want" 0.001'

# 3. Bad values: one error line, nothing written.
for args in "--length-s 0" "--length-s -1" "--length-s 601" "--until-db 0" "--until-db 3" "--until-db -201" \
            "--until-db nan" "--length-s abc" "--until-db -6x"; do
  rm -f bad.wav
  # shellcheck disable=SC2086
  expect_error 2 "${args%% *}" "$wane" render pluck.toml -o bad.wav $args
  check '[ ! -e bad.wav ]'
done
expect_error 2 "--length-s and --until-db" "$wane" render pluck.toml -o bad.wav --length-s 2 --until-db -60
check '[ ! -e bad.wav ]'
# A held partial above the level never falls to it: named, and --length-s suggested.
sed -e 's/{ t60_s = 6.4 }/{ t60_s = inf }/' pluck.toml > held.toml
expect_error 1 "partial 1 holds its level" "$wane" render held.toml -o bad.wav --until-db -60
check '[ ! -e bad.wav ]'

# 4. keymap applies them to every file of the set.
"$wane" -q keymap pluck.toml -o set-until --notes C3..C4 --every 6 --until-db -60
n=0
for f in set-until/*.wav; do
  n=$((n + 1))
  # A transpose moves the frequencies, not the decays: every file lasts as long as the render above.
  check 'near "$(length_of "$f")" "$want" 0.001'
done
check '[ $n -eq 3 ]'
"$wane" -q keymap pluck.toml -o set-len --notes C3..C4 --every 6 --length-s 1.5
for f in set-len/*.wav; do check 'near "$(length_of "$f")" 1.5 0.0001'; done
expect_error 2 "--until-db 5" "$wane" keymap pluck.toml -o set-bad --notes C3..C4 --until-db 5
check '[ ! -e set-bad ] || [ -z "$(ls set-bad)" ]'
expect_error 2 "--length-s and --until-db" "$wane" keymap pluck.toml -o set-bad --notes C3..C4 --length-s 1 --until-db -60

# 5. A pluck (sox's synth) cut at 1 s while it sounds: analyze says so, the patch records it, and
# a render three times as long keeps falling after the cut (no hold): each half second quieter
# than the one before, and the last second at least 10 dB under the 100 ms before the cut (the
# recording fell 10 dB over its one second).
sox -n -r 44100 -b 16 pluck.wav synth 1.0 pluck 220
"$wane" analyze pluck.wav -o cut.toml > out.txt 2>&1
cat out.txt
check 'grep -q "cut at 1.000 s while sounding" out.txt'
check 'grep -q "^cut_s = 1.0000$" cut.toml'
# No part's last segment holds (a level kept up to the cut, e.g. a noise band of the recording's
# steady hiss, is a segment with until_s = the cut; the one after it falls).
check '! grep -q "{ t60_s = inf }" cut.toml'
"$wane" -q render cut.toml -o cut3.wav --length-s 3 --bits 32f
at_cut=$(rms_db cut3.wav 0.9 0.1)
prev=$at_cut
for start in 1.0 1.5 2.0 2.48; do
  level=$(rms_db cut3.wav "$start" 0.5)
  echo "cut pluck x3: $level dB over $start s + 0.5 s"
  check 'awk -v a="$prev" -v b="$level" "BEGIN { exit !(b < a) }"'
  prev=$level
done
last=$(rms_db cut3.wav 2.0 0.98)
echo "cut pluck x3: $at_cut dB before the cut, $last dB in the last second"
check 'awk -v a="$at_cut" -v b="$last" "BEGIN { exit !(a - b >= 10) }"'

# 6. A steady tone (three sines, sox): it holds, no cut, and its copy holds its level past the end.
sox -n -r 44100 -b 16 -c 3 sines.wav synth 3 sine 220 sine 440 sine 660
sox sines.wav organ.wav remix - gain -n -6 fade 0.01
"$wane" analyze organ.wav -o organ.toml > out.txt 2>&1
cat out.txt
check 'grep -q "holds its level" out.txt'
check '! grep -q "^cut_s" organ.toml'
"$wane" -q render organ.toml -o organ3.wav --length-s 9 --bits 32f
at_end=$(rms_db organ.wav 2.5 0.4)
last=$(rms_db organ3.wav 8.0 0.9)
echo "held tone: $at_end dB at the recording's end, $last dB 5.5 s later"
check 'near "$at_end" "$last" 0.5'

exit $fail
