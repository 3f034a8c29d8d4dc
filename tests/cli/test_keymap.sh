#!/usr/bin/env bash
# wane edit / blend / keymap from the command line: outputs, determinism and bad input (clear
# one-line error naming the option, exit code, nothing written).
source "$(dirname "$0")/preamble.sh"

write_test_pluck pluck.toml "cli test pluck" 0.5 "-12.0 0.004 [ { t60_s = 1.9, until_s = 0.2 }, { t60_s = 6.4 } ]" \
  "-18.0 0.004 [ { t60_s = 1.2 } ]" "-20.0 0.004 [ { t60_s = 0.9 } ]"
sed -e "s/^version = 1/version = 5/" pluck.toml > newer.toml  # one past the newest version read (4: glides)
# Loud: three in-phase partials at -3 dBFS each peak near +6.5 dBFS together.
sed -e 's/^peak_db = .*/peak_db = -3.0/' -e 's/^phase_rad = .*/phase_rad = 0.0/' pluck.toml > loud.toml

# ---- edit
check '"$wane" edit pluck.toml -o up.toml --transpose 12 --decay-follows-pitch >/dev/null'
check 'grep -q "^f0_hz = 440.000000" up.toml'
check 'grep -q "^freq_hz = 1320.000000" up.toml'
check 'grep -q "t60_s = 0.9500, until_s = 0.1020" up.toml'  # rule of thumb p = 1: T60 and the segment (after the 4 ms attack) halve
check '"$wane" edit pluck.toml -o c4.toml --to-note C4 >/dev/null && grep -q "^f0_hz = 261.625565" c4.toml'
# Same seed, same bytes; another seed, other bytes.
check '"$wane" edit pluck.toml -o s5a.toml --seed 5 --detune-cents 3 --level-jitter-db 1 --random-phase >/dev/null'
check '"$wane" edit pluck.toml -o s5b.toml --seed 5 --detune-cents 3 --level-jitter-db 1 --random-phase >/dev/null'
check '"$wane" edit pluck.toml -o s6.toml --seed 6 --detune-cents 3 --level-jitter-db 1 --random-phase >/dev/null'
check 'cmp -s s5a.toml s5b.toml'
check '! cmp -s s5a.toml s6.toml'

expect_error 1 "--transpose: no partial is left below the Nyquist" "$wane" edit pluck.toml -o none.toml --transpose 100
check '[ ! -e none.toml ]'
expect_error 2 "--to-note: unknown note name 'H4'" "$wane" edit pluck.toml -o none.toml --to-note H4
expect_error 2 "exclude each other" "$wane" edit pluck.toml -o none.toml --odd-only --even-only
expect_error 2 "exclude each other" "$wane" edit pluck.toml -o none.toml --transpose 2 --to-note C4
expect_error 2 "--decay-scale" "$wane" edit pluck.toml -o none.toml --decay-scale 0
expect_error 1 "overwrite the input" "$wane" edit pluck.toml -o pluck.toml --transpose 1
check '[ ! -e none.toml ]'

# ---- blend
check '"$wane" blend pluck.toml up.toml --mix 0.3 -o mix.toml >/dev/null'
check 'grep -q "^f0_hz = 270.851771" mix.toml'  # 220^0.7 * 440^0.3
expect_error 1 "newer.toml.*version" "$wane" blend pluck.toml newer.toml --mix 0.5 -o none.toml
check '[ ! -e none.toml ]'
expect_error 2 "--mix" "$wane" blend pluck.toml up.toml --mix 1.5 -o none.toml

# ---- keymap
check '"$wane" --quiet keymap pluck.toml -o set --notes C3..C4 --every 3 --layers 2 --variants 2 --seed 9 --detune-cents 4'
check '[ -f set/pluck.sfz ]'
check '[ "$(ls set/*.wav | wc -l)" -eq 20 ]'  # C3 D#3 F#3 A3 C4 x 2 layers x 2 variants
check '[ "$(grep -c "^<region>" set/pluck.sfz)" -eq 20 ]'
check 'grep -q "^<group> seq_length=2 seq_position=2" set/pluck.sfz'
check 'grep -q "^<region> sample=C3_v1_rr1.wav lokey=48 hikey=49 pitch_keycenter=48 lovel=1 hivel=63" set/pluck.sfz'
check 'grep -q "^<region> sample=C4_v2_rr2.wav lokey=59 hikey=60 pitch_keycenter=60 lovel=64 hivel=127" set/pluck.sfz'
# The same command again gives the same bytes.
check '"$wane" --quiet keymap pluck.toml -o set2 --notes C3..C4 --every 3 --layers 2 --variants 2 --seed 9 --detune-cents 4'
check 'for f in set/*.wav; do cmp -s "$f" "set2/$(basename "$f")" || exit 1; done'
check '! cmp -s set/C3_v2_rr1.wav set/C3_v2_rr2.wav'  # round-robin variants differ
# Never clip silently: one common gain, and a warning with the peak.
check '"$wane" --quiet keymap loud.toml -o loudset --notes C4..C4 --layers 2 2>loud_err.txt'
check 'grep -q "^wane: warning: the loudest render (C4_v2_rr1.wav) peaks at [0-9.]* dBFS: all 2 renders are scaled by one common gain" loud_err.txt'

expect_error 2 "--notes: unknown note name 'H6'" "$wane" keymap pluck.toml -o bad --notes C2..H6
expect_error 2 "--notes: the note range 'C6..C2' is reversed" "$wane" keymap pluck.toml -o bad --notes C6..C2
expect_error 2 "--notes: the high end of the note range 'C4..' is missing" "$wane" keymap pluck.toml -o bad --notes C4..
expect_error 2 "--notes: the note range '' has no" "$wane" keymap pluck.toml -o bad --notes ""
expect_error 1 "--notes: note C8: no partial is left below the Nyquist" "$wane" keymap pluck.toml -o bad --notes C7..C8 --rate 8000
expect_error 2 "--transpose: not available with keymap" "$wane" keymap pluck.toml -o bad --notes C4..C5 --transpose 3
expect_error 2 "--layers" "$wane" keymap pluck.toml -o bad --notes C4..C5 --layers 0
expect_error 1 "newer.toml.*version" "$wane" keymap newer.toml -o bad --notes C4..C5
check '[ ! -e bad ]'
exit $fail
