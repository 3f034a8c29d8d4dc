#!/usr/bin/env bash
# Out-of-range option values are bad usage everywhere: exit 2, one
# "wane: error:" line naming the option that is wrong (not another one), numbers in short form
# (no run of more than 12 digits), and no output written. Also: compare of two files whose rates
# libsamplerate cannot convert names both files (exit 1); global -q works after the subcommand.
source "$(dirname "$0")/preamble.sh"
patch="$src/patches/steel-pluck.toml"
# usage OPTION ARGS...: exit 2, one line naming OPTION, short numbers, out.* not written.
usage() {
  local option=$1; shift
  "$wane" "$@" >out.txt 2>err.txt; local rc=$?
  echo "$* -> exit $rc: $(head -c 300 err.txt)"
  [ $rc -eq 2 ] || { echo "FAIL: exit $rc, want 2"; fail=1; }
  [ "$(wc -l <err.txt)" -eq 1 ] || { echo "FAIL: not one line"; fail=1; }
  grep -q -- "^wane: error: .*$option" err.txt || { echo "FAIL: does not name $option"; fail=1; }
  local other
  other=$(grep -o -- '--[a-z][a-z0-9-]*' err.txt | grep -v -x -- "$option" | grep -v -x -- '--layers' | head -1)
  [ -z "$other" ] || { echo "FAIL: names $other as well"; fail=1; }
  ! grep -qE '[0-9]{13}' err.txt || { echo "FAIL: a long number"; fail=1; }
  [ -z "$(ls -A | grep '^out\.' | grep -v -x -e out.txt)" ] && [ ! -e set ] || { echo "FAIL: something written"; fail=1; }
}
usage --set-b render "$patch" -o out.wav --set-b 1e308
usage --scale-b render "$patch" -o out.wav --scale-b 1e308
usage --rate render "$patch" -o out.wav --rate 1e308
usage --rate render "$patch" -o out.wav --rate 7999
usage --length-s render "$patch" -o out.wav --length-s 1e308
usage --normalize-db render "$patch" -o out.wav --normalize-db -1e308
usage --gain-db render "$patch" -o out.wav --gain-db -1e308
usage --noise-db render "$patch" -o out.wav --noise-db 1e308
usage --detune-cents render "$patch" -o out.wav --detune-cents 1e308
usage --level-jitter-db render "$patch" -o out.wav --level-jitter-db 1e308
usage --layer-step-db keymap "$patch" -o set --notes C3..C4 --layers 2 --layer-step-db 1e308
usage --layer-tilt-db-oct keymap "$patch" -o set --notes C3..C4 --layers 2 --layer-tilt-db-oct 1e308
usage --rate keymap "$patch" -o set --notes C3..C4 --rate 1e308
usage --rate keymap "$patch" -o set --notes C3..C4 --rate 7999
usage --set-b edit "$patch" -o out.toml --set-b 1e308
usage --early-s compare "$patch" "$patch" --early-s -1e308

# compare across rates libsamplerate cannot bridge (ratio 96000): both files named, exit 1.
sox -n -r 768000 high.wav synth 0.2 sine 440 && sox -n -r 8 low.wav synth 1 sine 1 2>/dev/null
"$wane" compare high.wav low.wav >out.txt 2>err.txt; rc=$?
echo "compare 768 kHz vs 8 Hz -> exit $rc: $(cat err.txt)"
[ $rc -eq 1 ] && grep -q '^wane: error: low.wav: .*high.wav' err.txt || { echo "FAIL: compare message"; fail=1; }

# Global options before or after the subcommand (item 10a).
"$wane" render "$patch" -o q-after.wav --length-s 0.1 -q >out.txt 2>err.txt; rc=$?
echo "render ... -q -> exit $rc, stdout $(wc -c <out.txt) bytes"
[ $rc -eq 0 ] && [ ! -s out.txt ] && [ -s q-after.wav ] || { echo "FAIL: -q after the subcommand"; cat err.txt; fail=1; }
"$wane" --quiet render "$patch" -o q-before.wav --length-s 0.1 >out.txt 2>err.txt; rc=$?
[ $rc -eq 0 ] && [ ! -s out.txt ] || { echo "FAIL: --quiet before the subcommand"; fail=1; }
"$wane" info "$patch" --quiet >out.txt 2>err.txt; rc=$?
[ $rc -eq 0 ] && [ -s out.txt ] || { echo "FAIL: info --quiet (info's table is its output, still printed)"; fail=1; }
[ $fail -eq 0 ] && echo "PASS"
exit $fail
