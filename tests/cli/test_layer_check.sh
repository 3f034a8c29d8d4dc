#!/usr/bin/env bash
# tools/check_layers (run by .ci/run): passes on the tree as it is, and fails, naming the file,
# line and rule, on a copy of src/ with a violation of each kind planted.
source "$(dirname "$0")/preamble.sh"
checker="$src/tools/check_layers"

"$checker" "$src/src" > clean.txt 2>&1; rc=$?
cat clean.txt
check '[ $rc -eq 0 ]'

# plant LABEL FILE LINE EXPECTED: append LINE to a fresh copy's FILE; the checker must exit 1 and
# print EXPECTED (FILE:LINENO: the rule).
plant() {
    local label=$1 file=$2 text=$3 expected=$4
    rm -rf tree && cp -r "$src/src" tree
    printf '\n%s\n' "$text" >> "tree/$file"  # (a blank line first: the file may lack a final newline)
    local lineno
    lineno=$(wc -l < "tree/$file")
    "$checker" tree > "$label.txt" 2>&1; local rc=$?
    cat "$label.txt"
    check "[ $rc -eq 1 ]"
    check "grep -qF '$file:$lineno: $expected' $label.txt"
}
plant core_io tracking/onset.cpp '#include "io/audio_file.hpp"' 'tracking/ must not include "io/audio_file.hpp"'
plant core_report synthesis/render.hpp '#include "report/report.hpp"' 'synthesis/ must not include "report/report.hpp"'
plant core_cli core/units.hpp '#include "cli/common.hpp"' 'core/ must not include "cli/common.hpp"'
plant core_platform analysis/analyze.cpp '#include "platform/progress.hpp"' 'analysis/ must not include "platform/progress.hpp"'
plant core_file measure/align.cpp '#include <fstream>' 'measure/ must not include <fstream>'
plant core_library fitting/envelope_fit.cpp '#include <sndfile.h>' 'fitting/ must not include <sndfile.h>'
plant io_cli io/errors.hpp '  #  include "cli/common.hpp"' 'io/ must not include "cli/common.hpp"'
plant report_cli report/report.cpp '#include "cli/common.hpp"' 'report/ must not include "cli/common.hpp"'
# An include inside a comment line is not an include.
rm -rf tree && cp -r "$src/src" tree && echo '// #include "io/audio_file.hpp"' >> tree/core/units.hpp
"$checker" tree > comment.txt 2>&1; rc=$?
check '[ $rc -eq 0 ]'
exit $fail
