#!/usr/bin/env bash
# The committed demo notes are what the generator makes: regenerate them into the work folder
# with the built tools/make_demo_notes and compare byte for byte with demo-data/.
source "$(dirname "$0")/preamble.sh"
mkdir -p notes
gen="$(cd "$(dirname "$wane")" && pwd)/tools/make_demo_notes"  # the build folder's tools/
[ -x "$gen" ] || { echo "FAIL: generator not built: $gen"; exit 1; }
"$gen" notes || { echo "FAIL: $gen notes exited $?"; exit 1; }
files=(steel-string-d3.wav tuned-bar-a3.wav tuned-bar-a3.json garden-bell-a4.wav)
for f in "${files[@]}"; do
  if cmp "notes/$f" "$src/demo-data/$f"; then
    echo "same: $f ($(wc -c <"notes/$f") bytes)"
  else
    echo "FAIL: $f differs from demo-data/$f"; fail=1
  fi
done
# Nothing else written, nothing missing: the generator's output set is exactly the committed one.
made=$(cd notes && ls | sort | tr '\n' ' ')
want=$(printf '%s\n' "${files[@]}" | sort | tr '\n' ' ')
[ "$made" = "$want" ] || { echo "FAIL: generator wrote '$made', expected '$want'"; fail=1; }
# Bad usage: no folder -> exit 2; a missing folder -> exit 1 with a one-line error.
"$gen" >/dev/null 2>&1; rc=$?
[ $rc -eq 2 ] || { echo "FAIL: no argument gave exit $rc, expected 2"; fail=1; }
"$gen" no-such-folder >/dev/null 2>err.txt; rc=$?
[ $rc -eq 1 ] || { echo "FAIL: missing folder gave exit $rc, expected 1"; fail=1; }
[ "$(wc -l <err.txt)" -eq 1 ] && grep -q "no-such-folder" err.txt || { echo "FAIL: expected a one-line error naming the folder:"; cat err.txt; fail=1; }
exit $fail
