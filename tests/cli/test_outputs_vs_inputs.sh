#!/usr/bin/env bash
# Every output path is checked against every input, reports included. Each case
# must exit 1 with one "wane: error:" line saying what would be overwritten, and the input's bytes
# must not change (cmp against a copy made first). The note is made by sox (independent generator).
source "$(dirname "$0")/preamble.sh"
mkdir -p set
sox -n -r 48000 -b 24 note.wav synth 1 pluck 220 || { echo "FAIL: sox"; exit 1; }
cp note.wav note.html && cp note.wav note.copy
"$wane" -q analyze note.wav -o patch.toml || { echo "FAIL: analyze of the test note"; exit 1; }
cp patch.toml patch.copy
cp patch.toml set/C3_v1_rr1.wav   # a patch whose name is one of the set's samples

# The recording note.html is the input; --report would write note.html beside note.toml.
refused "analyze --report onto the input" note.html note.copy "overwrite the input" analyze note.html -o note.toml --report
[ ! -e note.toml ] || { echo "FAIL: a patch was written although the run was refused"; fail=1; }
# Two inputs, one of them named like the other's report.
mkdir -p batch && cp note.wav batch/a.wav && cp note.wav batch/b.html && cp note.wav batch/b.copy
refused "analyze batch --report onto an input" batch/b.html batch/b.copy "overwrite the input" \
  analyze batch/a.wav batch/b.html -o batch --report
# The report would replace the patch just written.
refused "analyze -o x.html --report" note.wav note.copy "report would overwrite the patch" analyze note.wav -o out.html --report
[ ! -e out.html ] || { echo "FAIL: out.html written"; fail=1; }
refused "report -o source" note.wav note.copy "overwrite the input" report note.wav patch.toml -o note.wav
refused "report -o patch" patch.toml patch.copy "overwrite the input" report note.wav patch.toml -o patch.toml
refused "keymap sample onto its patch" set/C3_v1_rr1.wav patch.copy "overwrite the input" \
  keymap set/C3_v1_rr1.wav -o set --notes C3..C4
if find . -name '.*.tmp' | grep -q .; then echo "FAIL: temporary file left behind"; fail=1; fi
[ $fail -eq 0 ] && echo "PASS"
exit $fail
