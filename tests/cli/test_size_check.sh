#!/usr/bin/env bash
# tools/check_sizes (run by .ci/run): passes on the tree as it is; on a copy of src/ with one file
# grown to 451 lines it fails and names the file; at exactly 450 lines it passes.
source "$(dirname "$0")/preamble.sh"
checker="$src/tools/check_sizes"

"$checker" "$src/src" > clean.txt 2>&1; rc=$?
cat clean.txt
check '[ $rc -eq 0 ]'

# grow FILE to exactly N lines in a fresh copy of src/ (appending comment lines).
grow() {
    local file=$1 n=$2
    rm -rf tree && cp -r "$src/src" tree
    while [ "$(wc -l < "tree/$file")" -lt "$n" ]; do echo '// padding' >> "tree/$file"; done
}
grow core/units.hpp 450
"$checker" tree > at_limit.txt 2>&1; rc=$?
cat at_limit.txt
check '[ $rc -eq 0 ]'
grow core/units.hpp 451
"$checker" tree > over.txt 2>&1; rc=$?
cat over.txt
check '[ $rc -eq 1 ]'
check "grep -qF 'core/units.hpp: 451 lines (limit 450)' over.txt"
exit $fail
