#!/usr/bin/env bash
# wane compare through the CLI, on notes made by sox (an independent generator):
# a note against itself gives distance 0 and equal decay times; against a copy 6 dB quieter
# (sox vol -6dB) 6.0 dB within 0.05 dB; a copy padded by 12.5 ms aligns at 600 samples;
# a copy at 44.1 kHz is resampled; bad input gives one error line and the right exit code.
source "$(dirname "$0")/preamble.sh"

sox -n -r 48000 -b 24 a.wav synth 2 pluck 220 || exit 1
sox a.wav b.wav vol -6dB || exit 1
sox a.wav c.wav pad 0.0125 || exit 1           # 600 samples of silence in front
sox a.wav -r 44100 d.wav vol -1dB || exit 1   # -1 dB so the resampler cannot clip

"$wane" compare a.wav a.wav --json > self.json; check '[ $? -eq 0 ]'
"$wane" compare a.wav b.wav --json > quiet.json; check '[ $? -eq 0 ]'
"$wane" compare a.wav c.wav --json > late.json; check '[ $? -eq 0 ]'
"$wane" compare a.wav d.wav --json > rate.json; check '[ $? -eq 0 ]'
"$wane" compare a.wav b.wav > quiet.txt; check '[ $? -eq 0 ]'

python3 - self.json quiet.json late.json rate.json <<'PY' || fail=1
import json, math, sys
self_, quiet, late, rate = (json.load(open(p)) for p in sys.argv[1:5])
bad = 0
def expect(ok, what):
    global bad
    print(("ok   " if ok else "FAIL ") + what)
    bad |= not ok

for name, r in (("self", self_), ("quiet", quiet)):
    sizes = r["stft"]["fft_sizes"]
    expect(sizes == [512, 1024, 2048, 4096], f"{name}: STFT sizes stated {sizes}")
# A note against itself: distance 0, convergence 0, identical in the early window, equal decays.
for part in ("whole", "early"):
    d = self_[part]["log_spectral_distance_db"]
    expect(d == 0, f"self: {part} log-spectral distance {d} == 0")
    c = self_[part]["spectral_convergence"]
    expect(c == 0, f"self: {part} spectral convergence {c} == 0")
expect(self_["early_snr_db"] is None and self_["early_identical"] is True, "self: identical in the first 100 ms")
measured = 0
for b in self_["octave_bands"]:
    for t in ("t20_s", "t30_s", "t20_fit_s", "t30_fit_s"):
        expect(b["a"][t] == b["b"][t], f"self: {b['nominal_hz']} Hz {t} {b['a'][t]} == {b['b'][t]}")
        measured += t in ("t20_s", "t30_s") and b["a"][t] is not None
expect(measured >= 2, f"self: {measured} decay times measured (>= 2)")
# sox vol -6dB: every bin 6 dB down (project requirement: 6.0 dB within 0.05 dB).
for part in ("whole", "early"):
    d = quiet[part]["log_spectral_distance_db"]
    expect(abs(d - 6.0) <= 0.05, f"quiet: {part} log-spectral distance {d} = 6.0 +- 0.05")
    for res in quiet[part]["per_resolution"]:
        expect(abs(res["log_spectral_distance_db"] - 6.0) <= 0.05,
               f"quiet: {part} N={res['fft_size']} {res['log_spectral_distance_db']} = 6.0 +- 0.05")
# b = g a with g = 10^(-6/20): SNR = -20 log10(1 - g) = 6.04 dB, convergence 1 - g = 0.4988.
g = 10 ** (-6 / 20)
snr = quiet["early_snr_db"]
expect(abs(snr - (-20 * math.log10(1 - g))) < 0.01, f"quiet: early SNR {snr} = {-20 * math.log10(1 - g):.4f} +- 0.01")
sc = quiet["whole"]["spectral_convergence"]
expect(abs(sc - (1 - g)) < 1e-3, f"quiet: spectral convergence {sc} = {1 - g:.5f} +- 1e-3")
expect(quiet["alignment"]["lag_frames"] == 0, f"quiet: lag {quiet['alignment']['lag_frames']} == 0")
# A 6 dB gain does not change decay times (within 1 %).
for ba, bb in zip(self_["octave_bands"], quiet["octave_bands"]):
    for t in ("t20_s", "t30_s"):
        x, y = ba["a"][t], bb["b"][t]
        if x is not None:
            expect(y is not None and abs(y - x) <= 0.01 * x, f"quiet: {ba['nominal_hz']} Hz {t} of B {y} = A {x} +- 1 %")
# sox pad 0.0125 at 48 kHz = 600 samples.
lag = late["alignment"]["lag_frames"]
expect(lag == 600, f"late: lag {lag} == 600")
d = late["whole"]["log_spectral_distance_db"]
expect(d < 0.01, f"late: aligned whole distance {d} < 0.01 dB")
# 44.1 kHz copy at -1 dB: resampled to 48 kHz, distance near 1 dB (resampler error adds a little).
expect(rate["b_resampled_from_hz"] == 44100, f"rate: resampled from {rate['b_resampled_from_hz']}")
d = rate["whole"]["log_spectral_distance_db"]
expect(abs(d - 1.0) < 0.3, f"rate: whole distance {d} = 1.0 +- 0.3 dB")
sys.exit(bad)
PY

check 'grep -q "LSD dB, first 100 ms" quiet.txt'
check 'grep -q "hop = size/4" quiet.txt'
check 'grep -q "T30 A" quiet.txt'
# The headline and the difference sentences: itself gets no sentence; 6 dB quieter is named as
# "6.0 dB too quiet" (sox vol -6dB, an independent gain).
"$wane" compare a.wav a.wav > self.txt
check 'grep -q "^fidelity: log-spectral distance 0.00 dB (whole note), onset SNR identical" self.txt'
check 'grep -q "^differences: none" self.txt'
grep -A3 "^differences" quiet.txt
check 'grep -q "^  - the copy is 6.0 dB too quiet .* throughout the note" quiet.txt'
check '[ "$(python3 -c "import json,sys; print(len(json.load(open(sys.argv[1]))[\"differences\"]))" self.json)" = 0 ]'
# --help defines every figure it prints.
"$wane" compare --help > help.txt
for figure in "log-spectral distance (the headline)" "onset SNR" "spectral convergence" "T20, T30" \
              "difference cells" "missing partial" "smeared onset"; do
    check "grep -q \"^  $figure: \" help.txt"
done

"$wane" compare a.wav missing.wav > /dev/null 2> err.txt; rc=$?
check '[ $rc -eq 1 ]'
check '[ $(wc -l < err.txt) -eq 1 ] && grep -q "^wane: error: .*missing.wav" err.txt'
"$wane" compare a.wav b.wav --early-s 0 > /dev/null 2> err.txt; rc=$?
check '[ $rc -eq 2 ] && grep -q "^wane: error: --early-s" err.txt'
"$wane" compare a.wav > /dev/null 2> err.txt; rc=$?
check '[ $rc -eq 2 ]'
"$wane" compare --help | tail -n 3 | grep -q "wane compare" || { echo "FAIL: help footer"; fail=1; }
exit $fail
