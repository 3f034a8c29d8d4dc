#!/usr/bin/python3
"""The sampler chain of a keymap set, checked on audio (numpy; independent of wane's code).

midi OUT.mid KEY VELOCITY NOTE_ON_S NOTE_OFF_S END_S
    writes a one-track standard MIDI file (format 0, 480 ticks per quarter at the default
    120 BPM, so 960 ticks per second; Standard MIDI File 1.0 layout) with one note.
held RENDER.wav SAMPLE_S
    the held note has one onset: 10 ms RMS frames; an onset is a frame at least 6 dB over the
    loudest of the 50 ms before it and within 60 dB of the render's loudest frame.
short RENDER.wav WANE.wav RELEASE_S
    0.3 s after the release the render's level is wane's own WAV's within 3 dB, after the
    sampler's fixed gain (render minus WAV over the first 0.1 s, before the release) is removed.
dynamics SOFT.wav HARD.wav
    the soft note is quieter (RMS of the first 0.5 s) and darker (spectral centroid of the same
    span) than the hard one.
Prints the compared values; exit 1 on failure.
"""
import struct
import sys
import warnings

import numpy as np
import scipy.io.wavfile as wavfile

warnings.filterwarnings("ignore", category=wavfile.WavFileWarning)  # the smpl chunk wane writes
TICKS_PER_S = 960


def vlq(n):
    out = [n & 0x7F]
    n >>= 7
    while n:
        out.insert(0, (n & 0x7F) | 0x80)
        n >>= 7
    return bytes(out)


def write_midi(path, key, velocity, on_s, off_s, end_s):
    events = [(on_s, bytes([0x90, key, velocity])), (off_s, bytes([0x80, key, 0])),
              (end_s, b"\xff\x01\x03end")]  # a text event holds the file open until end_s
    track, last = b"", 0
    for t, msg in events:
        tick = int(round(t * TICKS_PER_S))
        track += vlq(tick - last) + msg
        last = tick
    track += vlq(0) + b"\xff\x2f\x00"
    with open(path, "wb") as f:
        f.write(b"MThd" + struct.pack(">IHHH", 6, 0, 1, 480) + b"MTrk" + struct.pack(">I", len(track)) + track)


def mono(path):
    rate, x = wavfile.read(path)
    full_scale = float(np.iinfo(x.dtype).max) + 1.0 if x.dtype.kind == "i" else 1.0  # scipy keeps 24-bit in int32
    x = x.astype(np.float64) / full_scale
    x = x.mean(axis=1) if x.ndim == 2 else x
    return rate, x


def level_db(x, rate, t0, t1):
    seg = x[int(t0 * rate):int(t1 * rate)]
    return 10 * np.log10(np.mean(seg ** 2) + 1e-30)


def start_of(x):
    """First sample above 1e-4 of the peak: where the note starts in a render."""
    return int(np.argmax(np.abs(x) > 1e-4 * np.abs(x).max()))


def held(render, sample_s):
    rate, x = mono(render)
    n = int(0.01 * rate)
    frames = np.array([10 * np.log10(np.mean(x[i:i + n] ** 2) + 1e-30) for i in range(0, len(x) - n, n)])
    top = frames.max()
    onsets = [i for i in range(5, len(frames)) if frames[i] > top - 60 and frames[i] >= frames[i - 5:i].max() + 6]
    first = [i for i in range(len(frames)) if frames[i] > top - 60][0]
    onsets = sorted(set(onsets) | {first})
    length = len(x) / rate
    print(f"held note: render {length:.2f} s (sample {float(sample_s):.2f} s): onsets at "
          f"{[round(i * 0.01, 2) for i in onsets]} s")
    return 0 if len(onsets) == 1 else 1


def short(render, wane_wav, release_s):
    ra, xa = mono(render)
    rw, xw = mono(wane_wav)
    xa = xa[start_of(xa):]
    rel = float(release_s)
    offset = level_db(xa, ra, 0.0, 0.1) - level_db(xw, rw, 0.0, 0.1)
    t = rel + 0.3
    got = level_db(xa, ra, t - 0.025, t + 0.025) - offset
    want = level_db(xw, rw, t - 0.025, t + 0.025)
    top = level_db(xw, rw, 0.0, 0.1)
    print(f"short note: released at {rel:.2f} s; at {t:.2f} s the render is {got - top:+.2f} dB and wane's WAV "
          f"{want - top:+.2f} dB (re its first 0.1 s; sampler gain {offset:+.2f} dB removed): "
          f"difference {got - want:+.2f} dB (tolerance 3)")
    return 0 if abs(got - want) <= 3.0 else 1


def centroid_hz(x, rate):
    mag = np.abs(np.fft.rfft(x * np.hanning(len(x))))
    f = np.fft.rfftfreq(len(x), 1.0 / rate)
    return float(np.sum(f * mag ** 2) / np.sum(mag ** 2))


def dynamics(soft, hard):
    rs, xs = mono(soft)
    rh, xh = mono(hard)
    xs, xh = xs[start_of(xs):], xh[start_of(xh):]
    ls, lh = level_db(xs, rs, 0.0, 0.5), level_db(xh, rh, 0.0, 0.5)
    cs, ch = centroid_hz(xs[:int(0.5 * rs)], rs), centroid_hz(xh[:int(0.5 * rh)], rh)
    print(f"velocities: soft {ls - lh:+.2f} dB re hard; spectral centroid soft {cs:.1f} Hz, hard {ch:.1f} Hz")
    return 0 if ls < lh and cs < ch else 1


if __name__ == "__main__":
    cmd, args = sys.argv[1], sys.argv[2:]
    if cmd == "midi":
        write_midi(args[0], int(args[1]), int(args[2]), float(args[3]), float(args[4]), float(args[5]))
        sys.exit(0)
    sys.exit({"held": held, "short": short, "dynamics": dynamics}[cmd](*args))
