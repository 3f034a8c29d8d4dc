#!/usr/bin/env bash
# tools/check_types (run by .ci/run): passes on the tree as it is; fails, naming the type and both
# files, on a copy of src/ where a second header defines a type name another header already
# defines (the clash of 2026-12: wane::onset_params in tracking/onset.hpp and measure/align.hpp);
# passes when the second definition sits in an anonymous namespace.
source "$(dirname "$0")/preamble.sh"
checker="$src/tools/check_types"

"$checker" "$src/src" "$src/tests" "$src/tools" > clean.txt 2>&1; rc=$?
cat clean.txt
check '[ $rc -eq 0 ]'

rm -rf tree && cp -r "$src/src" tree
printf '\nnamespace wane {\nstruct onset_params {\n    double hop_s = 0.002;\n};\n}  // namespace wane\n' >> tree/measure/align.hpp
"$checker" tree > clash.txt 2>&1; rc=$?
cat clash.txt
check '[ $rc -eq 1 ]'
check "grep -qF 'onset_params: measure/align.hpp tracking/onset.hpp' clash.txt"

rm -rf tree && cp -r "$src/src" tree
printf '\nnamespace wane {\nnamespace {\nstruct onset_params {\n    double hop_s = 0.002;\n};\n}  // namespace\n}  // namespace wane\n' >> tree/measure/align.cpp
"$checker" tree > anonymous.txt 2>&1; rc=$?
cat anonymous.txt
check '[ $rc -eq 0 ]'
exit $fail
