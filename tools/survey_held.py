#!/usr/bin/python3
"""Partials whose copy stands well above the recording (numpy/scipy only, no wane code).

usage: survey_held.py NOTES_DIR WORK_DIR [--over-db D] [--min-s S] [--range-db R] [--note STEM]

WORK_DIR is a tools/bench_fidelity work folder: for each NOTES_DIR/STEM.wav it holds the patch
STEM.toml and the full copy STEM.full.wav rendered at the recording's rate 20 dB down (the
survey scales it back). For every partial of every patch, the level of the recording and of the
copy in a narrow band around the partial's frequency is read frame by frame, and a partial is
listed where the copy stands more than D dB (default 6) over the recording for longer than S
seconds (default 0.1) while the copy is within R dB (default 70) of the loudest band level of the
note (so a difference far under everything heard is not listed). "Over the recording" means over
the recording's largest band level within +-W seconds (--beat-s W, default 0.3): a beating pair's
trough, which one partial with a smooth envelope cannot follow, is not listed, a partial held or
raised above the recording's whole neighbourhood is (--beat-s 0 compares frame by frame).

Band level (our definition): frames of FRAME_S = 0.1 s, Hann window, hop HOP_S = 0.025 s, each
zero-padded to 1 s (1 Hz bins); the level of a frame is the largest bin within +-BAND_HZ = 5 Hz
of the partial's frequency, as the amplitude of a sinusoid (2 |X| / sum(w)) in dBFS, so a lone
steady partial reads its own level. A neighbour within the window's main lobe (20 Hz) adds to
both signals alike. Frame times are the frames' centres from the copy's start (the note's onset).

Alignment: the copy's place in the recording is found as in tools/eval_fidelity.py (the lag of
the largest cross-correlation of the copy's first 0.5 s within the recording's first 5.5 s).

Each row: note, the partial's frequency and harmonic number, the span over which the copy
stands over the recording (first to last frame centre of the longest such run, seconds), the
largest excess there (dB), the recording's (its local largest) and the copy's band levels at that frame, and the
patch's own envelope level of the partial there (dBFS before the note's gain).
"""
import argparse
import os
import re
import sys
import warnings

import numpy as np
import scipy.io.wavfile as wavfile
import scipy.signal as sig

FRAME_S = 0.1
HOP_S = 0.025
BAND_HZ = 5.0
GAIN_DB = -20.0  # tools/bench_fidelity renders its copies at this gain


def read_mono(path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rate, data = wavfile.read(path)
    x = data.astype(np.float64)
    if data.dtype == np.int16:
        x /= 32768.0
    elif data.dtype == np.int32:
        x /= 2147483648.0
    if x.ndim > 1:
        x = x.mean(axis=1)
    return rate, x


def align(rec, copy, rate):
    span = min(len(copy), int(0.5 * rate))
    max_lag = min(int(5.0 * rate), len(rec) - span)
    if max_lag <= 0:
        return 0
    c = sig.correlate(rec[: max_lag + span], copy[:span], mode="valid", method="fft")
    return int(np.argmax(c[: max_lag + 1]))


def frame_spectra(x, rate):
    """(frame centre times s, amplitude spectra frames x bins at 1 Hz) of x."""
    n = int(round(FRAME_S * rate))
    hop = int(round(HOP_S * rate))
    win = np.hanning(n + 1)[:-1]
    frames = 1 + (len(x) - n) // hop
    idx = np.arange(n)[None, :] + hop * np.arange(frames)[:, None]
    spec = np.abs(np.fft.rfft(x[idx] * win, n=rate, axis=1)) * 2.0 / win.sum()
    return (np.arange(frames) * hop + n / 2) / rate, spec


def band_level_db(spec, freq_hz):
    lo, hi = int(np.floor(freq_hz - BAND_HZ)), int(np.ceil(freq_hz + BAND_HZ)) + 1
    lo, hi = max(lo, 0), min(hi, spec.shape[1])
    return 20 * np.log10(np.maximum(spec[:, lo:hi].max(axis=1), 1e-12))


def parse_partials(text):
    """[(freq_hz, harmonic, envelope)] of a patch, envelope = (attack_s, peak_db, [(t60, until)])."""
    out = []
    for block in text.split("[[partial]]")[1:]:
        block = block.split("[[")[0]
        f = float(re.search(r"^freq_hz = ([-\d.e]+)", block, re.M).group(1))
        h = int(re.search(r"^harmonic = (\d+)", block, re.M).group(1))
        att = float(re.search(r"^attack_s = ([-\d.e]+)", block, re.M).group(1))
        pk = float(re.search(r"^peak_db = ([-\d.e]+)", block, re.M).group(1))
        segs = []
        for m in re.finditer(r"t60_s = ([-\w.]+)(?:, until_s = ([-\d.e]+))?", block.split("decay =")[1].split("\n")[0]):
            t60 = float(m.group(1))
            segs.append((t60, float(m.group(2)) if m.group(2) else np.inf))
        out.append((f, h, (att, pk, segs)))
    return out


def envelope_db(env, t):
    """Level of the patch format's envelope (patches/README.md) at time t, dB."""
    att, pk, segs = env
    if t < att:
        return pk + 20 * np.log10(max(t / att, 1e-9))
    level, start = pk, att
    for t60, until in segs:
        slope = -60.0 / t60 if np.isfinite(t60) else 0.0
        if t < until:
            return level + slope * (t - start)
        level += slope * (until - start)
        start = until
    return level


def local_max(level, half):
    """Largest value of level within +-half frames of each frame."""
    if half <= 0:
        return level
    pad = np.concatenate([np.full(half, -np.inf), level, np.full(half, -np.inf)])
    return np.lib.stride_tricks.sliding_window_view(pad, 2 * half + 1).max(axis=1)


def longest_run(mask):
    best, cur, best_end = 0, 0, -1
    for i, m in enumerate(mask):
        cur = cur + 1 if m else 0
        if cur > best:
            best, best_end = cur, i
    return best, best_end


def survey_note(rec_path, work, stem, args):
    rate, rec = read_mono(rec_path)
    _, copy = read_mono(os.path.join(work, stem + ".full.wav"))
    copy *= 10 ** (-GAIN_DB / 20)
    lag = align(rec, copy, rate)
    n = min(len(rec) - lag, len(copy))
    times, sx = frame_spectra(rec[lag: lag + n], rate)
    _, sy = frame_spectra(copy[:n], rate)
    parts = parse_partials(open(os.path.join(work, stem + ".toml")).read())
    top = max((band_level_db(sx, f).max() for f, _, _ in parts if f < rate / 2 - BAND_HZ), default=0.0)
    rows = []
    for f, h, env in parts:
        if f >= rate / 2 - BAND_HZ:
            continue
        lx, ly = local_max(band_level_db(sx, f), int(round(args.beat_s / HOP_S))), band_level_db(sy, f)
        over = (ly - lx > args.over_db) & (ly > top - args.range_db)
        run, end = longest_run(over)
        if run == 0 or (run - 1) * HOP_S < args.min_s:
            continue
        span = slice(end - run + 1, end + 1)
        worst = span.start + int(np.argmax((ly - lx)[span]))
        rows.append((stem, f, h, times[span.start], times[end], ly[worst] - lx[worst], lx[worst], ly[worst],
                     envelope_db(env, times[worst]), times[worst]))
    return rows


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("notes")
    ap.add_argument("work")
    ap.add_argument("--over-db", type=float, default=6.0)
    ap.add_argument("--min-s", type=float, default=0.1)
    ap.add_argument("--range-db", type=float, default=70.0)
    ap.add_argument("--beat-s", type=float, default=0.3)
    ap.add_argument("--note", default=None)
    args = ap.parse_args()
    stems = sorted(f[:-4] for f in os.listdir(args.notes) if f.endswith(".wav"))
    if args.note:
        stems = [s for s in stems if s == args.note]
    print(f"{'note':<20} {'freq_hz':>9} {'h':>3} {'from_s':>6} {'to_s':>6} {'over':>5} {'at_s':>5} "
          f"{'rec_db':>7} {'copy_db':>7} {'env_db':>7}")
    total = 0
    per_note = {}
    for stem in stems:
        if not os.path.exists(os.path.join(args.work, stem + ".toml")):
            print(f"{stem}: no patch in {args.work}", file=sys.stderr)
            continue
        rows = survey_note(os.path.join(args.notes, stem + ".wav"), args.work, stem, args)
        per_note[stem] = len(rows)
        total += len(rows)
        for r in rows:
            print(f"{r[0]:<20} {r[1]:9.1f} {r[2]:3d} {r[3]:6.2f} {r[4]:6.2f} {r[5]:5.1f} {r[9]:5.2f} "
                  f"{r[6]:7.1f} {r[7]:7.1f} {r[8]:7.1f}")
    print("per note: " + ", ".join(f"{k} {v}" for k, v in per_note.items()))
    print(f"total: {total} partials over the recording by more than {args.over_db:g} dB for more than "
          f"{args.min_s:g} s")


if __name__ == "__main__":
    main()
