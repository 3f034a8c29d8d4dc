#!/usr/bin/env bash
# (a) an output file name of 250 bytes (any name the system accepts) is written
# by render, edit, analyze and keymap, with no temporary left; (b) info escapes a patch name's
# control characters (an ESC sequence shows as \x1b, no raw control byte reaches the terminal);
# (c) 200,000 unknown keys give at most 11 warning lines, the last saying how many more there were.
source "$(dirname "$0")/preamble.sh"
patch="$src/patches/steel-pluck.toml"
long=$(printf 'n%.0s' $(seq 1 246))   # 246 + ".wav" = 250 bytes
"$wane" -q render "$patch" -o "$long.wav" --length-s 0.2 2>err.txt || { echo "FAIL: render to a 250-byte name: $(cat err.txt)"; fail=1; }
"$wane" -q edit "$patch" -o "$long.toml" --transpose 2 2>err.txt || { echo "FAIL: edit to a 250-byte name: $(cat err.txt)"; fail=1; }
sox -n -r 48000 -b 24 note.wav synth 1 pluck 220
long_in=$(printf 'm%.0s' $(seq 1 245))
"$wane" -q analyze note.wav -o "$long_in.toml" --report 2>err.txt || { echo "FAIL: analyze to a 250-byte name: $(cat err.txt)"; fail=1; }
echo "(a) written: $(ls | awk '{ print length($0) }' | sort -n | tail -1) bytes the longest name"
[ -s "$long.wav" ] && [ -s "$long.toml" ] && [ -s "$long_in.toml" ] && [ -s "$long_in.html" ] || { echo "FAIL: (a) a file is missing"; fail=1; }
if ls -A | grep -q '\.tmp$'; then echo "FAIL: (a) temporary left: $(ls -A | grep '\.tmp$')"; fail=1; fi

# (b) A name with an escape sequence (clear screen, red) and a bell.
sed -e 's/^name = .*/name = "evil\\u001b[2J\\u001b[31mred\\u0007"/' "$patch" > evil.toml
"$wane" info evil.toml >info.txt 2>err.txt || { echo "FAIL: (b) info: $(cat err.txt)"; fail=1; }
grep 'name ' info.txt | head -1
if LC_ALL=C grep -q "$(printf '[\001-\010\013-\037\177]')" info.txt; then echo "FAIL: (b) a raw control byte printed"; fail=1; fi
grep -qF 'evil\x1b[2J\x1b[31mred\x07' info.txt || { echo "FAIL: (b) the name is not shown escaped"; fail=1; }

# (c) 200,000 unknown keys.
{ sed '/^\[note\]/,$d' "$patch"; seq 1 200000 | sed 's/^/unknown_key_/; s/$/ = 1/'; sed -n '/^\[note\]/,$p' "$patch"; } > noisy.toml
"$wane" info noisy.toml >/dev/null 2>err.txt; rc=$?
lines=$(wc -l <err.txt)
echo "(c) exit $rc, $lines warning lines; last: $(tail -1 err.txt)"
[ $rc -eq 0 ] || { echo "FAIL: (c) exit $rc"; fail=1; }
[ "$lines" -le 11 ] || { echo "FAIL: (c) $lines lines"; fail=1; }
tail -1 err.txt | grep -q '199990 more warnings (200000 in all)' || { echo "FAIL: (c) no summary line"; fail=1; }
[ $fail -eq 0 ] && echo "PASS"
exit $fail
