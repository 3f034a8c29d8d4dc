#!/usr/bin/env bash
# The input file is never modified: analyze, render, edit and blend with the output path equal to
# an input (directly, spelled differently, through a symbolic link, through a hard link) must
# refuse with one "wane: error:" line and exit 1, and the input's bytes must not change (cmp
# against a copy made first). The note is made by sox (an independent generator).
source "$(dirname "$0")/preamble.sh"
mkdir -p sub

sox -n -r 48000 -b 24 note.wav synth 2 pluck 220 || { echo "FAIL: sox"; exit 1; }
"$wane" -q analyze note.wav -o patch.toml || { echo "FAIL: analyze of the test note"; exit 1; }
cp note.wav note.copy && cp patch.toml patch.copy
ln -s note.wav note-link.toml
ln -s patch.toml patch-link.wav
ln -s patch.toml patch-link.toml
ln note.wav note-hard.toml
ln patch.toml patch-hard.toml

# refused_input LABEL INPUT COPY ARGS...: refused (preamble.sh) with the message that it would
# overwrite the input.
refused_input() { local l=$1 i=$2 c=$3; shift 3; refused "$l" "$i" "$c" 'overwrite the input' "$@"; }

refused_input "analyze -o input" note.wav note.copy analyze note.wav -o note.wav
refused_input "analyze -o ./sub/../input" note.wav note.copy analyze note.wav -o ./sub/../note.wav
refused_input "analyze -o symlink" note.wav note.copy analyze note.wav -o note-link.toml
refused_input "analyze -o hard link" note.wav note.copy analyze note.wav -o note-hard.toml
refused_input "analyze -o absolute path" note.wav note.copy analyze note.wav -o "$PWD/note.wav"
refused_input "render -o input" patch.toml patch.copy render patch.toml -o patch.toml
refused_input "render -o symlink" patch.toml patch.copy render patch.toml -o patch-link.wav
refused_input "edit -o input" patch.toml patch.copy edit patch.toml -o patch.toml --transpose 7
refused_input "edit -o symlink" patch.toml patch.copy edit patch.toml -o patch-link.toml --transpose 7
refused_input "edit -o hard link" patch.toml patch.copy edit patch.toml -o patch-hard.toml --transpose 7
refused_input "blend -o second input" patch.toml patch.copy blend note-link.toml patch.toml -o patch.toml
# The links themselves are still links to the inputs.
[ -L note-link.toml ] && [ -L patch-link.wav ] && [ -L patch-link.toml ] || { echo "FAIL: a link was replaced"; fail=1; }
# No temporary left anywhere.
if ls -A . sub | grep -q '\.tmp$'; then echo "FAIL: temporary file left behind"; fail=1; fi
[ $fail -eq 0 ] && echo "PASS"
exit $fail
