#!/usr/bin/env bash
# The SFZ of a keymap set plays right. Checked by tests/cli/sfz_check.py (independent of
# wane's code): regions tile the requested keys x velocities exactly once per round-robin
# position, every referenced sample exists beside the SFZ, every pitch_keycenter equals its WAV's
# smpl unity note (pitch fraction 0), <global> has loop_mode=one_shot; only known opcodes.
# Also: without a length option no sample is cut while it still sounds (the 10 ms before its end
# fade lie more than 70 dB below its peak; the default runs to 80 dB below the patch's peak).
source "$(dirname "$0")/preamble.sh"
py=/usr/bin/python3
write_test_pluck pluck.toml "sfz test pluck" 0.5 "-12.0 0.004 [ { t60_s = 0.6, until_s = 0.2 }, { t60_s = 1.5 } ]" \
  "-18.0 0.004 [ { t60_s = 0.8 } ]"
# Key ranges as MIDI numbers (C3 = 48, C5 = 72, A2 = 45, D4 = 62).
for spec in "48 72 3 3 2" "45 45 1 1 1" "48 62 2 4 3"; do
  read -r low high every layers variants <<<"$spec"
  out="set_${low}_${high}"
  check '"$wane" -q keymap pluck.toml -o "$out" --notes "$low..$high" --every "$every" --layers "$layers" --variants "$variants" --rate 16000'
  check "$py $src/tests/cli/sfz_check.py $out/pluck.sfz $low $high"
done
# Several patches: roots A3 (the pluck) and E4 (the pluck a fifth up, written by edit), keys
# between interpolated; the plan names both; the same checks hold.
check '"$wane" -q edit pluck.toml -o fifth.toml --to-note E4'
check '"$wane" -q keymap pluck.toml fifth.toml -o multi --notes 52..67 --every 3 --layers 2 --variants 2 --rate 16000'
check "$py $src/tests/cli/sfz_check.py multi/multi.sfz 52 67"
check 'grep -q "^Cs4_v2_rr1.wav .*0.429 x pluck.toml at A3 + 0.571 x fifth.toml at E4" multi/multi.plan.txt'
check '"$wane" -q keymap pluck.toml fifth.toml -o multi2 --notes 52..67 --every 3 --layers 2 --variants 2 --rate 16000'
# Deterministic: the same samples and the same plan (the set is named after its folder).
check '! for f in multi/*.wav; do cmp -s "$f" "multi2/$(basename "$f")" || echo differs; done | grep -q differs'
check 'cmp -s multi/multi.plan.txt multi2/multi2.plan.txt'
# Default length: the render runs until the sound is 80 dB below the patch's peak, so its end is
# far below its start (a cut at the patch's 0.5 s would leave the end only ~20 dB down).
check '$py - set_45_45/A2_v1_rr1.wav <<PY
import sys, numpy as np, scipy.io.wavfile as w
sr, x = w.read(sys.argv[1]); x = x.astype(float)
peak = np.max(np.abs(x)); n = int(0.01 * sr); tail = np.sqrt(np.mean(x[-2 * n:-n] ** 2))
drop = 20 * np.log10(peak / max(tail, 1e-9)); print(f"length {len(x) / sr:.2f} s, 10 ms before the end fade {drop:.1f} dB under the peak")
sys.exit(0 if drop > 70 and len(x) / sr > 0.5 else 1)
PY'
exit $fail
