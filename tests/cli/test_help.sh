#!/usr/bin/env bash
# The CLI skeleton: --help and --version work, every subcommand's help ends with examples,
# bad usage exits 2 with a one-line "wane: error:" message.
source "$(dirname "$0")/preamble.sh"

check '"$wane" --version | grep -q "^wane [0-9]"'
check '"$wane" --help | grep -q "analyze"'
for c in analyze render info edit blend keymap compare report; do
  out=$("$wane" "$c" --help) || { echo "FAIL: $c --help exit code"; fail=1; }
  echo "$out" | tail -n 3 | grep -q "wane $c" || { echo "FAIL: $c --help does not end with an example"; fail=1; }
done
"$wane" --no-such-flag >/dev/null 2>err.txt; rc=$?
check '[ $rc -eq 2 ]'
check 'grep -q "^wane: error:" err.txt'
"$wane" >/dev/null 2>err.txt; rc=$?
check '[ $rc -eq 2 ]'
exit $fail
