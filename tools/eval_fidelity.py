#!/usr/bin/python3
"""Independent evaluation of a copy against its recording (numpy/scipy only, no wane code).

usage: eval_fidelity.py RECORDING COPY_FULL COPY_PARTIALS [--gain-db G] [--minus-mean]

Both copies are renders of one patch at the recording's rate: COPY_FULL with the noise bands,
COPY_PARTIALS without them. A stereo recording is compared as its mean of channels (mono mix).
A copy rendered with a gain of G dB (to stay under full scale) is scaled back by -G dB first.
With --minus-mean the recording's mean (a DC offset, which carries no sound) is taken off first,
so a copy without the recording's offset is not scored down for it (tools/make_variants, dc). Off
by default: the 17 real notes' own small means (54 dB and more under their peaks, sox stat)
still move their log-spectral distances by up to 0.2 dB (glockenspiel 6.97 -> 6.76).
Prints one JSON object with the figures below.

Alignment: the copy starts at the note's onset; its place in the recording is the lag in
[0, MAX_LAG_S = 5 s] that maximizes the cross-correlation of the copy's first 0.5 s with the
recording (found by FFT; the copy's own claim of the onset is not used). The lag once stopped at
0.5 s, which scored a note recorded after more than about 0.5 s of room noise or silence at the
wrong place (tools/make_variants). On a recording shorter than 0.5 s + MIN_LAG_RANGE_S the span
is cut so that lags up to MIN_LAG_RANGE_S = 50 ms are still tried: the copy (as long as the
recording after its onset) once filled the whole recording, no lag but 0 was tried, and a 0.44 s
celesta note onset 2 ms in scored -6 dB where its copy lined up at its onset scores 15.

Figures (definitions are ours, stated here; tolerances are chosen by the callers):
- lsd_db[N], N in 512/2048/8192: log-spectral distance. Hann window of N samples, hop N/4, power
  spectra P (recording) and Q (copy) over the aligned common length; levels floored at 100 dB
  below the recording's largest bin power; per frame sqrt(mean over bins of (10 log10 P -
  10 log10 Q)^2), averaged over frames whose recording power is within 60 dB of its loudest frame.
  lsd_db = mean of the three resolutions. Not `wane compare`'s log-spectral distance (its --help
  defines that one: bins within 60 dB of the peak only, one RMS over all of them): this one also
  weighs the quiet floor between the partials and every frame of the tail alike, which is what a
  benchmark of whole copies needs; tests/cli/test_compare_numpy.sh shows the two parting.
- snr100_db: 10 log10(sum x^2 / sum (x - y)^2) over the first 100 ms after the aligned onset,
  x the recording and y the partials-only copy.
- peak_diff_db: peak |sample| of the full copy minus that of the recording (whole files), dB.
- decay_err_pct: per octave band (250 Hz to 4 kHz, 4th-order Butterworth band-pass, zero phase),
  the time for the smoothed level (10 ms RMS) to fall from 5 dB to 25 dB below its maximum, for
  recording and full copy over their common length; median over bands of |copy/recording - 1| in
  percent, bands where the recording does not fall 25 dB within the common length left out
  (null when no band qualifies).
"""
import json
import sys

import numpy as np
import scipy.io.wavfile as wavfile
import scipy.signal as sig

FLOOR_DB = 100.0
FRAME_RANGE_DB = 60.0
RESOLUTIONS = (512, 2048, 8192)
ALIGN_SPAN_S = 0.5
MAX_LAG_S = 5.0
MIN_LAG_RANGE_S = 0.05


def read_channels(path):
    """(rate, samples x channels) of a WAV file, scaled to [-1, 1) for integer formats."""
    rate, data = wavfile.read(path)
    if data.dtype == np.int16:
        x = data.astype(np.float64) / 32768.0
    elif data.dtype == np.int32:
        x = data.astype(np.float64) / 2147483648.0
    else:
        x = data.astype(np.float64)
    if x.ndim == 1:
        x = x[:, None]
    return rate, x


def read_mono(path):
    """(rate, mean of the channels) of a WAV file."""
    rate, x = read_channels(path)
    return rate, x.mean(axis=1)


def align(rec, copy, rate):
    span = min(len(copy), int(ALIGN_SPAN_S * rate), len(rec) - int(MIN_LAG_RANGE_S * rate))
    if span <= 0:
        return 0
    max_lag = min(int(MAX_LAG_S * rate), len(rec) - span)
    if max_lag <= 0:
        return 0
    seg = rec[: max_lag + span]
    c = sig.correlate(seg, copy[:span], mode="valid", method="fft")
    return int(np.argmax(c[: max_lag + 1]))


def lsd(x, y, n):
    if len(x) < n:
        return None
    hop = n // 4
    win = np.hanning(n + 1)[:-1]
    frames = 1 + (len(x) - n) // hop
    idx = np.arange(n)[None, :] + hop * np.arange(frames)[:, None]
    P = np.abs(np.fft.rfft(x[idx] * win, axis=1)) ** 2
    Q = np.abs(np.fft.rfft(y[idx] * win, axis=1)) ** 2
    floor = P.max() * 10 ** (-FLOOR_DB / 10)
    d = 10 * np.log10(np.maximum(P, floor)) - 10 * np.log10(np.maximum(Q, floor))
    per_frame = np.sqrt(np.mean(d * d, axis=1))
    e = P.sum(axis=1)
    keep = e >= e.max() * 10 ** (-FRAME_RANGE_DB / 10)
    return float(per_frame[keep].mean())


def fall_time(x, rate):
    """Seconds for the 10 ms RMS level to fall from -5 dB to -25 dB re its maximum."""
    w = max(1, int(0.01 * rate))
    p = np.convolve(x * x, np.ones(w) / w, mode="same")
    lv = 10 * np.log10(np.maximum(p, 1e-30))
    top = int(np.argmax(lv))
    after = lv[top:] - lv[top]
    a = np.nonzero(after <= -5)[0]
    b = np.nonzero(after <= -25)[0]
    if len(a) == 0 or len(b) == 0:
        return None
    return (b[0] - a[0]) / rate


def decay_error(x, y, rate):
    errs = []
    for fc in (250, 500, 1000, 2000, 4000):
        hi = fc * np.sqrt(2)
        if hi >= rate / 2:
            continue
        sos = sig.butter(4, [fc / np.sqrt(2), hi], btype="bandpass", fs=rate, output="sos")
        tx = fall_time(sig.sosfiltfilt(sos, x), rate)
        ty = fall_time(sig.sosfiltfilt(sos, y), rate)
        if tx is None or tx <= 0:
            continue
        if ty is None:
            errs.append(100.0)
            continue
        errs.append(abs(ty / tx - 1) * 100)
    return float(np.median(errs)) if errs else None


def main():
    rec_path, full_path, part_path = sys.argv[1:4]
    gain_db = float(sys.argv[5]) if len(sys.argv) > 5 and sys.argv[4] == "--gain-db" else 0.0
    rate, rec = read_mono(rec_path)
    rate_f, full = read_mono(full_path)
    rate_p, part = read_mono(part_path)
    full = full * 10 ** (-gain_db / 20)
    part = part * 10 ** (-gain_db / 20)
    if "--minus-mean" in sys.argv[4:]:
        rec = rec - rec.mean()
    assert rate == rate_f == rate_p, "copies must be rendered at the recording's rate"
    lag = align(rec, part, rate)
    n = min(len(rec) - lag, len(full), len(part))
    x = rec[lag: lag + n]
    out = {"lag_s": lag / rate}
    for name, y in (("full", full[:n]), ("partials", part[:n])):
        vals = {str(r): lsd(x, y, r) for r in RESOLUTIONS}
        have = [v for v in vals.values() if v is not None]
        out["lsd_" + name] = vals
        out["lsd_" + name + "_db"] = float(np.mean(have)) if have else None
    m = int(0.1 * rate)
    err = x[:m] - part[:m]
    out["snr100_db"] = float(10 * np.log10(np.sum(x[:m] ** 2) / max(np.sum(err ** 2), 1e-30)))
    out["peak_diff_db"] = float(20 * np.log10(np.max(np.abs(full)) / np.max(np.abs(rec))))
    out["decay_err_pct"] = decay_error(x, full[:n], rate)
    print(json.dumps(out))


if __name__ == "__main__":
    main()
