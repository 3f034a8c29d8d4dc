#!/usr/bin/env bash
# Stereo through the CLI: a two-channel recording (tests/data/real-notes, licence beside it) gives a
# version 3 stereo patch whose render sox reads as two channels; --mono gives a mono patch (version 2,
# or 4 where partials glide),
# --channel one channel; a 6-channel file is refused naming --channel and --mono; edit --width 0
# makes both channels of the render alike, --pan places a mono patch (stereo patch); blend of a mono
# and a stereo patch is stereo; compare of two stereo files prints the per-channel and
# inter-channel figures, and so does the report of a stereo patch; keymap of a stereo patch writes
# two-channel WAVs.
source "$(dirname "$0")/preamble.sh"
note=$src/tests/data/real-notes/marimba_fs4_stereo.wav

check '"$wane" -q analyze "$note" -o st.toml'
check 'grep -q "^version = 3$" st.toml && grep -q "^channels = 2$" st.toml && grep -q "^pan = " st.toml'
check '"$wane" -q analyze "$note" -o mono.toml --mono'
check 'grep -qE "^version = (2|4)$" mono.toml && ! grep -q "^pan = " mono.toml && ! grep -q "^channels = " mono.toml'
check '"$wane" -q analyze "$note" -o ch2.toml --channel 2 && grep -qE "^version = (2|4)$" ch2.toml && ! grep -q "^pan = " ch2.toml'
check '"$wane" info st.toml | grep -q "R-L dB"'

check '"$wane" -q render st.toml -o st.wav'
check '[ "$(sox --i -c st.wav)" = 2 ]'
check '"$wane" -q render mono.toml -o mono.wav && [ "$(sox --i -c mono.wav)" = 1 ]'

# Renders at -6 dB: a pan or width 0 puts up to 3 dB more into one channel than the copy had.
# Width 0: both channels alike (sox: the difference of the channels is silent to 24-bit rounding).
check '"$wane" -q edit st.toml -o narrow.toml --width 0 && "$wane" -q render narrow.toml -o narrow.wav --gain-db -6'
diff_peak=$(sox narrow.wav -n remix 1,2i stat 2>&1 | awk '/Maximum amplitude/ {print $3}')
echo "width 0: peak of left minus right = $diff_peak"
check '[ -n "$diff_peak" ] && awk -v p="$diff_peak" "BEGIN { exit !(p < 1e-5) }"'
# --pan on a mono patch: stereo, the right channel louder (sox RMS per channel).
check '"$wane" -q edit mono.toml -o right.toml --pan 0.6 && grep -q "^channels = 2$" right.toml'
check '"$wane" -q render right.toml -o right.wav --gain-db -6'
rms_l=$(sox right.wav -n remix 1 stat 2>&1 | awk '/RMS     amplitude/ {print $3}')
rms_r=$(sox right.wav -n remix 2 stat 2>&1 | awk '/RMS     amplitude/ {print $3}')
echo "pan 0.6: RMS left $rms_l right $rms_r (pan law: right - left = 20 log10 tan(0.4 pi) = 9.76 dB)"
check '[ -n "$rms_l" ] && [ -n "$rms_r" ] && awk -v l="$rms_l" -v r="$rms_r" "BEGIN { d = 20 * log(r / l) / log(10); exit !(d > 9.6 && d < 9.9) }"'
check '"$wane" -q blend mono.toml st.toml --mix 0.5 -o blend.toml && grep -q "^channels = 2$" blend.toml'

out=$("$wane" compare "$note" st.wav 2>&1)
echo "$out" | tail -12
check 'echo "$out" | grep -q "per channel" && echo "$out" | grep -q "correlation"'
check '"$wane" compare "$note" st.wav --json | /usr/bin/python3 -c "import json,sys; d=json.load(sys.stdin); assert len(d[\"stereo\"][\"level_difference_db\"]) >= 5"'

# The report of a stereo patch has the channels section: each channel's figures and, per octave
# band 250 Hz-8 kHz, the level difference of source and copy; the source's correlation of the
# channels over the first second from the onset as numpy computes it (onset from compare --json).
check '"$wane" -q report "$note" st.toml -o st.html'
check 'grep -q "<section id=.stereo.>" st.html'
check '[ "$(grep -o "right − left level, [0-9]* Hz octave" st.html | wc -l)" = 6 ]'
"$wane" compare "$note" st.wav --json > st.json
corr_page=$(sed -n "s/.*<td>correlation of left and right<\/td><td>\([-0-9.]*\)<\/td>.*/\1/p" st.html)
corr_numpy=$(/usr/bin/python3 - "$note" st.json <<'PY'
import json, sys
import numpy as np, scipy.io.wavfile as w
rate, d = w.read(sys.argv[1])
x = d.astype(np.float64)
onset = int(round(json.load(open(sys.argv[2]))["alignment"]["onset_a_s"] * rate))
l, r = x[onset:onset + rate, 0], x[onset:onset + rate, 1]
print(f"{np.sum(l * r) / np.sqrt(np.sum(l * l) * np.sum(r * r)):.4f}")
PY
)
echo "report: source correlation $corr_page, numpy $corr_numpy"
check '[ -n "$corr_page" ] && near "$corr_page" "$corr_numpy" 0.01'
check '"$wane" -q report "$note" mono.toml -o mono.html && ! grep -q "<section id=.stereo.>" mono.html'

check '"$wane" -q keymap st.toml -o set --notes F4..G4 --every 2'
first=$(ls set/*.wav | head -1)
check '[ -n "$first" ] && [ "$(sox --i -c "$first")" = 2 ]'

# Six channels without --channel: refused, naming both choices; with --channel 3 analyzed.
sox -n -r 48000 -c 6 six.wav synth 1.0 pluck 440 fade 0 1.0 0.9
msg=$("$wane" analyze six.wav -o six.toml 2>&1); code=$?
echo "6 channels: exit $code: $msg"
check '[ $code = 1 ] && echo "$msg" | grep -q -- "--channel N (1 to 6)" && echo "$msg" | grep -q -- "--mono" && [ ! -e six.toml ]'
check '"$wane" -q analyze six.wav -o six.toml --channel 3'
exit $fail
