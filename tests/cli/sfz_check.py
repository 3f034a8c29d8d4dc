"""Independent checks of a wane keymap set (SFZ text + WAV files), with numpy-free Python.

usage: sfz_check.py SET.sfz LOWKEY HIGHKEY
Checks, printing what was compared:
  - every opcode is one of the SFZ format's opcodes used for a sample map (sfzformat.com: sample,
    lokey, hikey, pitch_keycenter, lovel, hivel, seq_length, seq_position, loop_mode,
    ampeg_release, amp_veltrack), headers <global>, <group>, <region>;
  - the regions tile keys LOWKEY..HIGHKEY x velocities 1..127 exactly once per seq_position;
  - every referenced sample exists (path relative to the SFZ file);
  - every region's pitch_keycenter equals the MIDI unity note of its WAV's smpl chunk, and the
    chunk's pitch fraction is 0 (the sample is rendered at the key's equal-tempered pitch).
The smpl chunk layout is read from the RIFF file here (Microsoft/IBM "Multimedia Programming
Interface and Data Specifications 1.0", 1991: smpl = manufacturer, product, sample period, MIDI
unity note, MIDI pitch fraction, ... as little-endian uint32).
Exit 1 on any failure.
"""
import os
import struct
import sys

KNOWN = {"sample", "lokey", "hikey", "pitch_keycenter", "lovel", "hivel", "seq_length", "seq_position",
         "loop_mode", "ampeg_release", "amp_veltrack"}
HEADERS = {"<global>", "<group>", "<region>", "<control>"}


def smpl_chunk(path):
    data = open(path, "rb").read()
    if data[:4] != b"RIFF" or data[8:12] != b"WAVE":
        return None
    at = 12
    while at + 8 <= len(data):
        cid = data[at:at + 4]
        size = struct.unpack("<I", data[at + 4:at + 8])[0]
        if cid == b"smpl":
            return struct.unpack("<9I", data[at + 8:at + 8 + 36])
        at += 8 + size + (size & 1)
    return None


def parse(path):
    """Returns (global opcodes, regions), each region its own opcodes over its group's over the
    global ones (the SFZ inheritance; a header's opcodes follow it)."""
    glob, group, regions, current = {}, {}, [], None
    for raw in open(path):
        for tok in raw.split("//")[0].split():
            if tok.startswith("<"):
                if tok not in HEADERS:
                    raise SystemExit(f"FAIL: unknown header {tok}")
                if tok == "<group>":
                    group = {}
                    current = group
                elif tok == "<region>":
                    current = {"_inherit": (glob, group)}
                    regions.append(current)
                else:
                    current = glob
                continue
            key, _, value = tok.partition("=")
            if key not in KNOWN or not value:
                raise SystemExit(f"FAIL: opcode '{tok}' is not one the check knows")
            current[key] = value
    merged = []
    for r in regions:
        g, grp = r.pop("_inherit")
        m = dict(g)
        m.update(grp)
        m.update(r)
        merged.append(m)
    return glob, merged


def main():
    sfz, low, high = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
    folder = os.path.dirname(os.path.abspath(sfz))
    glob, regions = parse(sfz)
    fail = 0
    print(f"global opcodes: {glob}; {len(regions)} regions")
    if glob.get("loop_mode") != "one_shot":
        print("FAIL: <global> has no loop_mode=one_shot"); fail = 1
    seq_length = int(regions[0].get("seq_length", "1")) if regions else 0
    cover = {}
    for r in regions:
        pos = int(r.get("seq_position", "1"))
        for key in range(int(r["lokey"]), int(r["hikey"]) + 1):
            for vel in range(int(r["lovel"]), int(r["hivel"]) + 1):
                cover[(pos, key, vel)] = cover.get((pos, key, vel), 0) + 1
    wrong = sum(1 for pos in range(1, seq_length + 1) for key in range(low, high + 1) for vel in range(1, 128)
                if cover.get((pos, key, vel), 0) != 1)
    outside = sum(1 for (pos, key, vel) in cover if not (1 <= pos <= seq_length and low <= key <= high and 1 <= vel <= 127))
    print(f"tiling: {seq_length} round-robin position(s) x keys {low}..{high} x velocities 1..127: "
          f"{wrong} cells not covered exactly once, {outside} cells outside")
    if wrong or outside:
        fail = 1
    checked = 0
    for r in regions:
        path = os.path.join(folder, r["sample"])
        if os.path.isabs(r["sample"]) or not os.path.isfile(path):
            print(f"FAIL: sample {r['sample']} missing or not relative"); fail = 1; continue
        smpl = smpl_chunk(path)
        if smpl is None:
            print(f"FAIL: {r['sample']} has no smpl chunk"); fail = 1; continue
        if smpl[3] != int(r["pitch_keycenter"]) or smpl[4] != 0:
            print(f"FAIL: {r['sample']}: smpl unity note {smpl[3]} fraction {smpl[4]}, "
                  f"pitch_keycenter {r['pitch_keycenter']}"); fail = 1
        checked += 1
    print(f"{checked} samples exist with a smpl unity note equal to pitch_keycenter")
    sys.exit(fail)


main()
