#!/usr/bin/env bash
# A patch edited by hand since wane wrote it is not overwritten. analyze
# writes a checksum line; re-running analyze onto its own unedited patch works; after a hand edit
# (sed) analyze, edit and blend refuse with exit 1 and one line naming the file and the option
# --overwrite-edited, leaving the bytes unchanged (cmp); with --overwrite-edited they replace it.
# A patch with no checksum (written by hand) is kept the same way.
source "$(dirname "$0")/preamble.sh"
sox -n -r 48000 -b 24 note.wav synth 1 pluck 220 || { echo "FAIL: sox"; exit 1; }
"$wane" -q analyze note.wav -o note.toml || { echo "FAIL: first analyze"; exit 1; }
tail -1 note.toml | grep -q '^# checksum fnv1a64 [0-9a-f]\{16\} ' || { echo "FAIL: no checksum line"; fail=1; }
"$wane" -q analyze note.wav -o note.toml || { echo "FAIL: re-running analyze onto its own unedited patch"; fail=1; }
sed -i 's/^gain_db = .*/gain_db = -6.00/' note.toml && cp note.toml edited.copy
cp "$src/patches/glass-tine.toml" hand.toml && cp hand.toml hand.copy
kept() {
  local label=$1 file=$2 copy=$3; shift 3
  "$wane" "$@" >out.txt 2>err.txt; local rc=$?
  echo "$label: exit $rc: $(cat err.txt)"
  [ $rc -eq 1 ] || { echo "FAIL: $label: exit $rc, want 1"; fail=1; }
  [ "$(wc -l <err.txt)" -eq 1 ] && grep -q "^wane: error: $file: .*--overwrite-edited" err.txt || { echo "FAIL: $label: message"; fail=1; }
  cmp -s "$file" "$copy" || { echo "FAIL: $label: $file changed"; fail=1; }
}
kept "analyze onto an edited patch" note.toml edited.copy analyze note.wav -o note.toml
kept "edit onto an edited patch" note.toml edited.copy edit hand.toml -o note.toml --transpose 1
kept "blend onto an edited patch" note.toml edited.copy blend hand.toml hand.toml -o note.toml
kept "analyze onto a hand-written patch" hand.toml hand.copy analyze note.wav -o hand.toml
"$wane" -q analyze note.wav -o note.toml --overwrite-edited || { echo "FAIL: --overwrite-edited"; fail=1; }
grep -q '^gain_db = -6.00' note.toml && { echo "FAIL: the edit survived --overwrite-edited"; fail=1; }
"$wane" -q analyze note.wav -o note.toml || { echo "FAIL: analyze after --overwrite-edited"; fail=1; }
[ $fail -eq 0 ] && echo "PASS"
exit $fail
