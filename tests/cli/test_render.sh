#!/usr/bin/env bash
# wane render: renders the example patches and a patch written here; sox (an independent reader)
# checks the written files' rate, format, length, peak and frequency; the same command twice gives
# the same bytes; bad options (rate outside 8-192 kHz, --length-s over 600 s) fail with exit 2 and
# bad input (a patch longer than 600 s, more than 40 dB over full scale) with exit 1, each with one
# "wane: error:" line naming the option or file, and no file written.
source "$(dirname "$0")/preamble.sh"

# A single partial at 1000 Hz, -6.02 dBFS (amplitude 0.5), held (t60 = inf), phase 0, no attack:
# sox must see a peak of 0.5 and a 1000 Hz tone.
cat > tone.toml <<'EOF'
format = "wane-patch"
version = 1

[note]
name = "test tone"
f0_hz = 1000.0
length_s = 1.0
inharmonicity_b = 0.0
gain_db = 0.0

[source]
file = ""
sample_rate_hz = 48000
onset_s = 0.0

[[partial]]
freq_hz = 1000.0
harmonic = 1
phase_rad = 0.0
attack_s = 0.0
peak_db = -6.0206
decay = [ { t60_s = inf } ]
EOF
# Two partials at +20 dB, note gain +24 dB, in phase at t = 0: peak ~ +50 dBFS (> +40 dB over).
sed -e 's/^peak_db = .*/peak_db = 20.0/' -e 's/^gain_db = .*/gain_db = 24.0/' tone.toml > loud.toml
cat >> loud.toml <<'EOF'

[[partial]]
freq_hz = 1500.0
harmonic = 0
phase_rad = 0.0
attack_s = 0.0
peak_db = 20.0
decay = [ { t60_s = inf } ]
EOF
# The tone at +3 dB note gain: over full scale (+2.98 dBFS) but within 40 dB.
sed -e 's/^gain_db = .*/gain_db = 9.0/' tone.toml > hot.toml

# 1. Every example patch renders; sox reads the result.
for p in "$src"/patches/*.toml; do
  [ -e "$p" ] || continue
  name=$(basename "$p" .toml)
  "$wane" -q render "$p" -o "$name.wav" 2>/dev/null; rc=$?
  check "[ $rc -eq 0 ]"
  check 'sox --i -r "$name.wav" | grep -qx 48000'
done

# 2. The tone: 44.1 kHz, 16 bit: rate, bits, length and peak as sox reads them.
out=$("$wane" render tone.toml -o tone.wav --rate 44100 --bits 16 2>err.txt); rc=$?
echo "$out"
check "[ $rc -eq 0 ]"
check 'echo "$out" | grep -q "peak -6.02 dBFS"'
check '[ "$(sox --i -r tone.wav)" = 44100 ]'
check '[ "$(sox --i -b tone.wav)" = 16 ]'
check '[ "$(sox --i -s tone.wav)" = 44100 ]'
stat=$(sox tone.wav -n stat 2>&1)
maxamp=$(echo "$stat" | awk '/^Maximum amplitude/ {print $3}')
freq=$(echo "$stat" | awk '/^Rough   frequency/ {print $3}')
echo "sox: maximum amplitude $maxamp, rough frequency $freq"
# 0.5 within 16-bit quantization plus TPDF dither (2 LSB = 6.1e-5); sox's rough frequency (zero
# crossings) within 1 %.
check 'awk -v a="$maxamp" "BEGIN { exit !(a > 0.5 - 7e-5 && a < 0.5 + 7e-5) }"'
check 'awk -v f="$freq" "BEGIN { exit !(f > 990 && f < 1010) }"'

# 3. Deterministic bytes: the same command twice (16-bit with dither, and 32-bit float).
"$wane" -q render tone.toml -o again.wav --rate 44100 --bits 16 2>/dev/null
check 'cmp -s tone.wav again.wav'
"$wane" -q render "$src/patches/steel-pluck.toml" -o f1.wav --bits 32f 2>/dev/null
sleep 1.1  # a second apart: nothing time-stamped may reach the file (libsndfile's PEAK chunk did)
"$wane" -q render "$src/patches/steel-pluck.toml" -o f2.wav --bits 32f 2>/dev/null
check 'cmp -s f1.wav f2.wav'
check '[ "$(sox --i -e f1.wav 2>/dev/null)" = "Floating Point PCM" ]'
check '[ "$(sox --i -b f1.wav 2>/dev/null)" = 32 ]'

# 4. --length-s and --normalize-db.
"$wane" -q render tone.toml -o short.wav --length-s 0.25 2>/dev/null
check '[ "$(sox --i -s short.wav)" = 12000 ]'
out=$("$wane" render hot.toml -o norm.wav --normalize-db -1 2>/dev/null); rc=$?
echo "$out"
check "[ $rc -eq 0 ]"
check 'echo "$out" | grep -q "normalized: peak +2.98 dBFS -> -1.00 dBFS"'
maxamp=$(sox norm.wav -n stat 2>&1 | awk '/^Maximum amplitude/ {print $3}')
echo "sox: normalized maximum amplitude $maxamp (expected 10^(-1/20) = 0.891251)"
check 'awk -v a="$maxamp" "BEGIN { exit !(a > 0.89124 && a < 0.89126) }"'

# 5. Errors: exit code, one error line naming the option or file, no file written.
expect_error() {  # expect_error CODE PATTERN ARGS...
  local code=$1 pattern=$2; shift 2
  rm -f bad.wav
  "$wane" render "$@" -o bad.wav >/dev/null 2>err.txt; local rc=$?
  echo "render $*: exit $rc: $(cat err.txt)"
  check "[ $rc -eq $code ]"
  check '[ "$(grep -c "^wane: error:" err.txt)" -eq 1 ]'
  check 'grep -q -- "$pattern" err.txt'
  check '[ ! -e bad.wav ]'
}
expect_error 2 "--rate 7999" tone.toml --rate 7999
expect_error 2 "--rate 192001" tone.toml --rate 192001
expect_error 2 "--rate 44100.5" tone.toml --rate 44100.5
expect_error 2 "--length-s 600.5" tone.toml --length-s 600.5
sed -e 's/^length_s = .*/length_s = 700.0/' tone.toml > long.toml
expect_error 1 "long.toml" long.toml
expect_error 1 "more than 40 dB over full scale" loud.toml
expect_error 1 "more than 40 dB over full scale" loud.toml --normalize-db -1
expect_error 1 "use --normalize-db -1 or --gain-db" hot.toml
expect_error 2 "--bits 20" tone.toml --bits 20
expect_error 2 "--normalize-db 1" tone.toml --normalize-db 1
expect_error 1 "no-such.toml" no-such.toml
# Output equal to the input is refused and leaves the input alone.
cp tone.toml same.toml
"$wane" render same.toml -o same.toml >/dev/null 2>err.txt; rc=$?
check "[ $rc -eq 1 ]"
check 'grep -q "^wane: error: .*same.toml" err.txt'
check 'cmp -s same.toml tone.toml'

exit $fail
