#!/usr/bin/env bash
# wane compare's log-spectral distance against an independent numpy computation of the definition
# `compare --help` states (sqrt of the mean squared dB difference over the STFT bins within 60 dB
# of the recording's peak bin, levels floored 100 dB under it, periodic Hann, sizes 512 to 4096,
# hop size/4, frames centred on 0, hop, 2 hop, ... reading zeros outside the signal; mean over
# the sizes), for the whole note and the first 100 ms, on notes made by sox (an independent
# generator) and copies that differ from them by frequency-dependent amounts. numpy only sees the
# two files and the alignment (lag, onset) that compare reports.
#
# Beside it the benchmark's figure (tools/eval_fidelity.py: per-frame RMS over all bins, averaged
# over frames) is computed for the same pairs, to check the reason the two are kept apart, as
# `compare --help` states it: compare's figure counts only the bins within 60 dB of the peak, so a
# copy that leaves out the quiet floor between the partials keeps a small compare distance while
# the benchmark's figure, which counts every bin of every frame, grows large.
source "$(dirname "$0")/preamble.sh"
py=/usr/bin/python3
$py -c 'import numpy, scipy' 2>/dev/null || { echo "SKIP: /usr/bin/python3 lacks numpy/scipy (tools/setup installs them)"; exit 77; }

sox -n -r 48000 -b 24 a.wav synth 2 pluck 220 || exit 1
# b: a darker, quieter copy (treble cut, bass lift: a dB difference that varies with frequency).
sox a.wav b.wav treble -9 bass +4 vol -2dB || exit 1
# d: three tones over white noise 65 dB under the tones' bins (outside compare's 60 dB range,
# inside the benchmark's 100 dB floor); c: the same tones without the noise (a copy that leaves
# out the recording's quiet floor).
sox -n -r 48000 -b 24 c.wav synth 2 sine 220 sine 440 sine 660 fade q 0.001 2 1.9 vol 0.1 || exit 1
sox -n -r 48000 -b 24 n.wav synth 2 whitenoise vol 0.001 || exit 1
sox -m -v 1 c.wav -v 1 n.wav d.wav || exit 1

for pair in "a b" "d c"; do
  set -- $pair
  "$wane" compare "$1.wav" "$2.wav" --json > "$1$2.json" || { echo "FAIL: compare $1 $2"; fail=1; continue; }
  $py - "$1.wav" "$2.wav" "$1$2.json" "$src/tools" <<'PY' || fail=1
import json, sys
import numpy as np
import scipy.io.wavfile as wavfile
sys.path.insert(0, sys.argv[4])
from eval_fidelity import lsd as bench_lsd, RESOLUTIONS  # the benchmark's definition

def read(path):
    rate, d = wavfile.read(path)
    scale = {np.dtype(np.int16): 2.0 ** 15, np.dtype(np.int32): 2.0 ** 31}.get(d.dtype, 1.0)
    x = d.astype(np.float64) / scale
    return rate, (x.mean(axis=1) if x.ndim == 2 else x)

rate, a = read(sys.argv[1])
_, b = read(sys.argv[2])
r = json.load(open(sys.argv[3]))
lag = r["alignment"]["lag_frames"]
onset = int(round(r["alignment"]["onset_a_s"] * rate))
# out[n] = b[n + lag], zero outside b, as long as a.
bal = np.zeros(len(a))
n = np.arange(len(a)) + lag
ok = (n >= 0) & (n < len(b))
bal[ok] = b[n[ok]]

def compare_lsd(x, y, size, start, end):
    hop = size // 4
    w = 0.5 - 0.5 * np.cos(2 * np.pi * np.arange(size) / size)
    pad = np.concatenate([np.zeros(size), x, np.zeros(size)]), np.concatenate([np.zeros(size), y, np.zeros(size)])
    centres = np.arange(start, end, hop)
    idx = (centres - size // 2 + size)[:, None] + np.arange(size)[None, :]
    P = np.abs(np.fft.rfft(pad[0][idx] * w, axis=1)) ** 2
    Q = np.abs(np.fft.rfft(pad[1][idx] * w, axis=1)) ** 2
    peak = P.max()
    used = P >= peak * 1e-6
    d = 10 * np.log10(np.maximum(P, peak * 1e-10)) - 10 * np.log10(np.maximum(Q, peak * 1e-10))
    return float(np.sqrt(np.mean(d[used] ** 2)))

bad = 0
sizes = r["stft"]["fft_sizes"]
early_end = min(len(a), onset + int(round(r["early_window_s"] * rate)))
for part, start, end in (("whole", 0, len(a)), ("early", onset, early_end)):
    ref = [compare_lsd(a, bal, s, start, end) for s in sizes]
    got = [res["log_spectral_distance_db"] for res in r[part]["per_resolution"]]
    for s, x, y in zip(sizes, ref, got):
        ok = abs(x - y) <= 0.01  # float FFT (KissFFT) against double: within 0.01 dB (our tolerance)
        print(("ok   " if ok else "FAIL ") + f"{sys.argv[1]} vs {sys.argv[2]} {part} N={s}: wane {y:.4f} dB, numpy {x:.4f} dB")
        bad |= not ok
    mean_ref, mean_got = float(np.mean(ref)), r[part]["log_spectral_distance_db"]
    ok = abs(mean_ref - mean_got) <= 0.01
    print(("ok   " if ok else "FAIL ") + f"{part} mean: wane {mean_got:.4f} dB, numpy {mean_ref:.4f} dB")
    bad |= not ok
# The benchmark's figure over the common span (eval_fidelity.py aligns the same way).
first = max(0, -lag)
m = min(len(a) - first, len(b) - max(0, lag))
vals = [bench_lsd(a[first:first + m], b[max(0, lag):max(0, lag) + m], s) for s in RESOLUTIONS]
bench = float(np.mean([v for v in vals if v is not None]))
print(f"   {sys.argv[1]} vs {sys.argv[2]}: compare {r['whole']['log_spectral_distance_db']:.2f} dB, benchmark {bench:.2f} dB")
open(sys.argv[3] + ".bench", "w").write(f"{bench}\n")
sys.exit(bad)
PY
done
# The two definitions part where the copy lacks the recording's quiet floor (d: tones + noise,
# c: the tones alone): compare (bins within 60 dB of the peak) stays small, the benchmark (every
# bin floored 100 dB down, every frame) is large.
compare_dc=$($py -c 'import json; print(json.load(open("dc.json"))["whole"]["log_spectral_distance_db"])')
bench_dc=$(cat dc.json.bench)
echo "copy without the floor: compare $compare_dc dB, benchmark $bench_dc dB"
check "awk -v c=$compare_dc -v b=$bench_dc 'BEGIN { exit !(b > c + 10) }'"
exit $fail
