#!/usr/bin/python3
"""Independent evaluation of a stereo copy against its stereo recording (numpy/scipy only, no wane
code), beside the mono copy of the same recording.

usage: eval_stereo.py RECORDING STEREO_COPY MONO_COPY [--gain-db G]

Both copies are full renders (noise bands included) at the recording's rate, each rendered with a
gain of G dB (scaled back here). STEREO_COPY is the render of the stereo patch (two channels),
MONO_COPY the render of the patch analyzed from the mix (`analyze --mono`). Prints one JSON object.

Alignment: as tools/eval_fidelity.py, on the mean of channels: the lag in [0, 0.5 s] maximizing
the cross-correlation of the copy's first 0.5 s with the recording; the same lag for both channels.

Figures (our definitions, stated here; the acceptance tolerances are the issue's):
- lsd_left_db, lsd_right_db: log-spectral distance of each channel of the stereo copy to the same
  channel of the recording, lsd_mono_db: the mono copy to the recording's mean of channels; each
  by tools/eval_fidelity.py's definition (Hann N, hop N/4, floor 100 dB under the recording's
  largest bin, frames within 60 dB of the loudest), mean over N = 512, 2048, 8192.
- ild_db: per octave band (centres 250 Hz to 8 kHz, 4th-order Butterworth band-pass between
  fc/sqrt2 and fc*sqrt2, zero phase), the right-minus-left energy ratio in dB over the first
  second after the onset, of the recording and of the copy; ild_max_diff_db the largest
  |copy - recording| over the bands.
- corr: Pearson correlation (zero lag) of left and right over the first second, recording and copy;
  corr_diff = copy - recording.
"""
import json
import os
import sys

import numpy as np
import scipy.io.wavfile as wavfile
import scipy.signal as sig

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from eval_fidelity import RESOLUTIONS, align, lsd, read_channels  # noqa: E402

BANDS_HZ = (250, 500, 1000, 2000, 4000, 8000)


def mean_lsd(x, y):
    vals = [lsd(x, y, r) for r in RESOLUTIONS]
    have = [v for v in vals if v is not None]
    return float(np.mean(have)) if have else None


def ild(left, right, rate):
    out = []
    for fc in BANDS_HZ:
        hi = min(fc * np.sqrt(2), 0.49 * rate)
        sos = sig.butter(4, [fc / np.sqrt(2), hi], btype="bandpass", fs=rate, output="sos")
        el = np.sum(sig.sosfiltfilt(sos, left) ** 2)
        er = np.sum(sig.sosfiltfilt(sos, right) ** 2)
        out.append(float(10 * np.log10(max(er, 1e-30) / max(el, 1e-30))))
    return out


def corr(left, right):
    return float(np.sum(left * right) / np.sqrt(np.sum(left ** 2) * np.sum(right ** 2)))


def main():
    rec_path, st_path, mono_path = sys.argv[1:4]
    gain_db = float(sys.argv[5]) if len(sys.argv) > 5 and sys.argv[4] == "--gain-db" else 0.0
    rate, rec = read_channels(rec_path)
    rate_s, st = read_channels(st_path)
    rate_m, mono = read_channels(mono_path)
    assert rate == rate_s == rate_m, "copies must be rendered at the recording's rate"
    assert rec.shape[1] == 2 and st.shape[1] == 2, "recording and stereo copy must have two channels"
    st = st * 10 ** (-gain_db / 20)
    mono = mono[:, 0] * 10 ** (-gain_db / 20)
    rec_mix = rec.mean(axis=1)
    lag = align(rec_mix, st.mean(axis=1), rate)
    lag_m = align(rec_mix, mono, rate)
    n = min(len(rec) - lag, len(st))
    n_m = min(len(rec) - lag_m, len(mono))
    x = rec[lag: lag + n]
    y = st[:n]
    out = {"lag_s": lag / rate,
           "lsd_left_db": mean_lsd(x[:, 0], y[:, 0]),
           "lsd_right_db": mean_lsd(x[:, 1], y[:, 1]),
           "lsd_mono_db": mean_lsd(rec_mix[lag_m: lag_m + n_m], mono[:n_m])}
    s = min(n, int(rate))
    out["ild_rec_db"] = ild(x[:s, 0], x[:s, 1], rate)
    out["ild_copy_db"] = ild(y[:s, 0], y[:s, 1], rate)
    out["ild_max_diff_db"] = float(np.max(np.abs(np.array(out["ild_copy_db"]) - np.array(out["ild_rec_db"]))))
    out["corr_rec"] = corr(x[:s, 0], x[:s, 1])
    out["corr_copy"] = corr(y[:s, 0], y[:s, 1])
    out["corr_diff"] = out["corr_copy"] - out["corr_rec"]
    print(json.dumps(out))


if __name__ == "__main__":
    main()
