#!/usr/bin/python3
"""More real notes for benchmarks: 40 plucked and struck samples of FluidR3_GM.sf2 that are not
among ../shared/real-notes, written the way that folder's notes were (numpy/scipy only).

usage: more_notes.py OUT_DIR [SF2]    (SF2: /usr/share/sounds/sf2/FluidR3_GM.sf2 by default,
                                       from the Debian package fluid-soundfont-gm, MIT licence)

Each note is one sample's PCM from its start to its end, unchanged (16-bit, its own rate, no gain,
no resampling, no fade), trimmed to at most 4 s; a stereo pair (two linked samples) becomes one
2-channel file, left first. The package's copyright file is copied beside them (LICENSE), and
OUT_DIR/roots.txt lists each file's sample name and the MIDI root key its instrument zone plays it
at (overridingRootKey, or the sample's original pitch) with the zone's fine tune in cents. The
notes then go through `tools/bench_fidelity build/wane OUT_DIR WORK` like the shared ones.
"""
import os
import shutil
import struct
import sys

import numpy as np
import scipy.io.wavfile as wavfile

# (file stem, left sample name, right sample name or None); names as stored in the SF2's sample
# headers (their octave numbers are the set's own, one above the root key for most instruments).
PICKS = [
    ("banjo_4", "Banjo 4", None), ("banjo_1", "Banjo 1", None), ("steel_d4", "Steel D4", None),
    ("steel_b4", "Steel B4", None), ("nylon_a3", "Nylon A3", None), ("nylon_g4", "Nylon G4", None),
    ("harpsichord_c4", "Harpsichord C4", None), ("harpsichord_f4", "Harpsichord F4", None),
    ("marimba_c5_stereo", "Marimba C 5(L)", "Marimba C 5(R)"), ("marimba_c6", "Marimba C 6(L)", None),
    ("xylophone_c6", "Xylophone C 6(L)", None), ("xylophone_c5", "Xylophone C 5(L)", None),
    ("harp_cs4", "Harp C#4(L)", None), ("harp_fs3_stereo", "Harp F#3(L)", "Harp F#3(R)"),
    ("rhodes_g4", "Rhodes G4(L)", None), ("rhodes_e3", "Rhodes E3(L)", None), ("pizz_a3", "Pizz A3(L)", None),
    ("pizz_e4", "Pizz E4(L)", None), ("timpani_1", "Timpani 1(L)", None), ("timpani_3", "Timpani 3(L)", None),
    ("musicbox_d4", "Music Box D4", None), ("musicbox_gs3", "Music Box G#3", None),
    ("celesta_c4", "Celesta C 4(L)", None), ("glocken_c8", "Glocken C8", None), ("jazz_d4", "Jazz Guitar D4", None),
    ("picked_bass_e2", "Picked Bass E2", None), ("finger_bass_a1", "Finger Bass A1", None),
    ("acoustic_bass_f2", "Acoustic Bass F2", None), ("tubular_c7", "Tubular Bells C7(L)", None),
    ("koto_c5", "Koto C 5(R)", None), ("steeldrum_c6", "Steel Drum C 6(L)", None),
    ("piano_d4_stereo", "P200 Piano D4(L)", "P200 Piano D4(R)"), ("piano_as3", "P200 Piano A#3(L)", None),
    ("piano_fs5", "P200 Piano F#5(L)", None), ("piano_d6", "P200 Piano D6(L)", None),
    ("piano_fs2", "P200 Piano F#2(L)", None), ("vibraphone_a4", "Vibraphone A4(L)", None),
    ("kalimba_g4", "Kalimba G4", None), ("clavinet_c4", "Clavinet C4", None), ("fretless_d2", "Fretless D2", None),
]
MAX_S = 4.0


def chunks(buf, off, end):
    while off < end:
        cid = buf[off:off + 4]
        size = struct.unpack_from("<I", buf, off + 4)[0]
        yield cid, off + 8, size
        off += 8 + size + (size & 1)


def read_sf2(path):
    """The 16-bit sample data, the sample headers and the instrument zones' generators."""
    f = open(path, "rb").read()
    pdta, smpl = {}, None
    for cid, o, s in chunks(f, 12, len(f)):
        if cid != b"LIST":
            continue
        for c2, o2, s2 in chunks(f, o + 4, o + s):
            if c2 == b"smpl":
                smpl = np.frombuffer(f[o2:o2 + s2], dtype="<i2")
            elif f[o:o + 4] == b"pdta":
                pdta[c2] = f[o2:o2 + s2]
    headers = {}
    for i in range(len(pdta[b"shdr"]) // 46 - 1):  # the last record is the terminal one
        rec = pdta[b"shdr"][46 * i:46 * (i + 1)]
        name = rec[:20].split(b"\0")[0].decode("latin1")
        start, end, _, _, rate = struct.unpack_from("<5I", rec, 20)
        pitch = rec[40]
        headers.setdefault(name, (i, start, end, rate, pitch))
    # Instrument zones: generator 53 = sampleID, 58 = overridingRootKey, 52 = fineTune (SF2 2.01).
    ibag = [struct.unpack_from("<H", pdta[b"ibag"], 4 * i)[0] for i in range(len(pdta[b"ibag"]) // 4)]
    igen = [struct.unpack_from("<Hh", pdta[b"igen"], 4 * i) for i in range(len(pdta[b"igen"]) // 4)]
    inst = [struct.unpack_from("<H", pdta[b"inst"], 22 * i + 20)[0] for i in range(len(pdta[b"inst"]) // 22)]
    zones = {}
    for k in range(len(inst) - 1):
        glob = {}
        for b in range(inst[k], inst[k + 1]):
            gens = dict(igen[ibag[b]:ibag[b + 1]])
            if 53 not in gens:
                glob = gens
                continue
            zone = dict(glob)
            zone.update(gens)
            zones.setdefault(gens[53] & 0xFFFF, zone)
    return smpl, headers, zones


def main():
    if len(sys.argv) not in (2, 3):
        sys.exit(__doc__)
    out = sys.argv[1]
    sf2 = sys.argv[2] if len(sys.argv) == 3 else "/usr/share/sounds/sf2/FluidR3_GM.sf2"
    if not os.path.exists(sf2):
        sys.exit(f"{sf2}: not found (apt-get install fluid-soundfont-gm)")
    smpl, headers, zones = read_sf2(sf2)
    os.makedirs(out, exist_ok=True)
    lines = []
    for stem, left, right in PICKS:
        i, start, end, rate, pitch = headers[left]
        n = min(end - start, int(MAX_S * rate))
        data = smpl[start:start + n]
        if right is not None:
            _, r_start, _, _, _ = headers[right]
            data = np.stack([data, smpl[r_start:r_start + n]], axis=1)
        wavfile.write(os.path.join(out, stem + ".wav"), rate, np.ascontiguousarray(data))
        zone = zones.get(i, {})
        root = zone.get(58, pitch)
        lines.append(f"{stem}.wav\t{left}\troot key {root}\tfine {zone.get(52, 0)} cents\t{rate} Hz\t{n / rate:.3f} s")
    open(os.path.join(out, "roots.txt"), "w").write("\n".join(lines) + "\n")
    shutil.copy("/usr/share/doc/fluid-soundfont-gm/copyright", os.path.join(out, "LICENSE"))
    print(f"{len(PICKS)} notes written to {out}")


if __name__ == "__main__":
    main()
