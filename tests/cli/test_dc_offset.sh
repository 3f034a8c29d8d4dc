#!/usr/bin/env bash
# A recording with a DC offset: analyze takes the mean off before the analysis when it stands
# within 50 dB of the peak, says so on its summary line, and the patch is the plain recording's:
# the same onset, the same ending (a note that decays to silence is read neither as cut while it
# sounds nor as holding its level: before, this one held its level, as did 7 more of the 17 real
# notes with the offset, the 5 that decay to silence among them), the same level. A clean note
# (its mean 56 dB and more under its peak: sox stat) is left alone.
source "$(dirname "$0")/preamble.sh"
note=$src/tests/data/real-notes/marimba_c3.wav  # natural decay, 56 dB under the peak at the end
sox "$note" plain.wav gain -0.5
sox -G "$note" dc.wav gain -0.5 dcshift 0.05
"$wane" analyze plain.wav -o plain.toml > plain.txt 2>&1
"$wane" analyze dc.wav -o dc.toml > dc.txt 2>&1
cat plain.txt dc.txt
check 'grep -q "a DC offset of +0.0[45][0-9]* of full scale removed" dc.txt'
check '! grep -q "DC offset" plain.txt'
check '! grep -q "cut at" plain.txt'
check '! grep -q "cut at" dc.txt'
check '! grep -q "holds its level" plain.txt'
check '! grep -q "holds its level" dc.txt'
key() { awk -v k="$2" '$1 == k { print $3; exit }' "$1"; }
echo "onset_s: plain $(key plain.toml onset_s), dc $(key dc.toml onset_s); gain_db: plain $(key plain.toml gain_db), dc $(key dc.toml gain_db)"
# Within 1 ms and 0.3 dB (our tolerances: what the onset search's block and the peak match's
# median of noise draws may move between two nearly equal inputs).
check 'near "$(key dc.toml onset_s)" "$(key plain.toml onset_s)" 0.001'
check 'near "$(key dc.toml gain_db)" "$(key plain.toml gain_db)" 0.3'
exit $fail
