#!/usr/bin/env bash
# tools/check_sizes (run by .ci/run): passes on the tree as it is (src/, tests/ and tools/ without
# arguments); on a copy of src/ with one file grown to 451 lines it fails and names the file; at
# exactly 450 lines it passes; a test file grown to 451 lines in a copy of tests/ fails too.
source "$(dirname "$0")/preamble.sh"
checker="$src/tools/check_sizes"

"$checker" "$src/src" > clean.txt 2>&1; rc=$?
cat clean.txt
check '[ $rc -eq 0 ]'
"$checker" > whole.txt 2>&1; rc=$?
cat whole.txt
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
rm -rf tests_copy && cp -r "$src/tests/unit" tests_copy
while [ "$(wc -l < tests_copy/test_envelope.cpp)" -lt 451 ]; do echo '// padding' >> tests_copy/test_envelope.cpp; done
"$checker" tests_copy > tests_over.txt 2>&1; rc=$?
cat tests_over.txt
check '[ $rc -eq 1 ]'
check "grep -qF 'test_envelope.cpp: 451 lines (limit 450)' tests_over.txt"
exit $fail
