#!/usr/bin/python3
"""Short cut recordings made from longer ones, to test how copies of cut notes end.

usage: tools/cut_notes.py SRC_DIR DST_DIR LENGTHS_S [MIN_LENGTH_S]

Every WAV in SRC_DIR at least MIN_LENGTH_S long (default 1.5) is written to DST_DIR cut at each
of LENGTHS_S (comma-separated seconds from the file's start, no fade: a sample cut while the note
sounds), as NAME_<centiseconds>.wav, in the file's own sample format. Then e.g.
  tools/cut_notes.py NOTES /tmp/cut 0.55,0.6,0.65
  /usr/bin/python3 tools/eval_texture.py build/wane /tmp/cut WORK
"""
import os
import sys

from scipy.io import wavfile


def main():
    args = sys.argv[1:]
    if len(args) not in (3, 4):
        sys.exit(__doc__)
    src, dst, lengths = args[0], args[1], [float(v) for v in args[2].split(",")]
    min_length_s = float(args[3]) if len(args) == 4 else 1.5
    os.makedirs(dst, exist_ok=True)
    for name in sorted(f for f in os.listdir(src) if f.endswith(".wav")):
        rate, x = wavfile.read(os.path.join(src, name))
        if len(x) / rate < min_length_s:
            continue
        for length_s in lengths:
            wavfile.write(os.path.join(dst, f"{name[:-4]}_{round(length_s * 100)}.wav"), rate, x[:int(length_s * rate)])


if __name__ == "__main__":
    main()
