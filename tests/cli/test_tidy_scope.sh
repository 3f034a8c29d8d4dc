#!/usr/bin/env bash
# tools/tidy_scope.py (CI's clang-tidy runs only where src/, tests/unit/ or tools/ changed since a
# clean commit): in a small git repository, a changed header brings every file that includes it
# (directly or through another header), a changed source only itself, a change to the rules
# (.clang-tidy, a CMakeLists.txt) or an unknown base commit brings every file; a test's header
# brings the test, a tool's source itself.
source "$(dirname "$0")/preamble.sh"
scope="$src/tools/tidy_scope.py"
git init -q repo && cd repo || exit 1
git config user.email t@t && git config user.name t
mkdir -p src/core src/cli
printf '#pragma once\n' > src/core/units.hpp
printf '#pragma once\n#include "core/units.hpp"\n' > src/core/envelope.hpp
printf '#include "core/envelope.hpp"\n' > src/core/envelope.cpp
printf '#include "envelope.hpp"\n' > src/core/patch.cpp       # beside the file, not under src/
printf '#include "core/units.hpp"\nint main() {}\n' > src/cli/main.cpp
printf 'int other;\n' > src/cli/other.cpp
printf 'Checks: -*\n' > .clang-tidy
git add -A && git commit -qm base
base=$(git rev-parse HEAD)
list() { python3 "$scope" "$1" | tr '\n' ' '; }

check '[ -z "$(list "$base")" ]'
echo '// edit' >> src/core/units.hpp
got=$(list "$base"); echo "units.hpp changed: $got"
check '[ "$got" = "src/cli/main.cpp src/core/envelope.cpp src/core/patch.cpp " ]'
git checkout -q -- . && echo '// edit' >> src/cli/other.cpp
got=$(list "$base"); echo "other.cpp changed: $got"
check '[ "$got" = "src/cli/other.cpp " ]'
git add -A && git commit -qm next   # committed changes count as well as uncommitted ones
check '[ "$(list "$base")" = "src/cli/other.cpp " ]'
printf '#include "core/units.hpp"\n' > src/cli/new.cpp   # a new, untracked file
check '[ "$(list "$base")" = "src/cli/new.cpp src/cli/other.cpp " ]'
rm src/cli/new.cpp
printf 'Checks: -*,bugprone-*\n' > .clang-tidy
check '[ "$(python3 "$scope" "$base" | wc -l)" -eq 4 ]'
git checkout -q -- .clang-tidy && echo '# x' > src/CMakeLists.txt
check '[ "$(python3 "$scope" "$base" | wc -l)" -eq 4 ]'
rm src/CMakeLists.txt
check '[ "$(python3 "$scope" 0123456789abcdef0123456789abcdef01234567 | wc -l)" -eq 4 ]'
# The tests and tools are sources too: a changed test header brings the test that includes it.
mkdir -p tests/unit tools
printf '#pragma once\n' > tests/unit/test_support.hpp
printf '#include "test_support.hpp"\n' > tests/unit/test_a.cpp
printf 'int b;\n' > tests/unit/test_b.cpp
printf 'int main() {}\n' > tools/bench_x.cpp
git add -A && git commit -qm tests
base=$(git rev-parse HEAD)
check '[ -z "$(list "$base")" ]'
echo '// edit' >> tests/unit/test_support.hpp
got=$(list "$base"); echo "test_support.hpp changed: $got"
check '[ "$got" = "tests/unit/test_a.cpp " ]'
git checkout -q -- . && echo '// edit' >> tools/bench_x.cpp
check '[ "$(list "$base")" = "tools/bench_x.cpp " ]'
check '[ "$(python3 "$scope" 0123456789abcdef0123456789abcdef01234567 | wc -l)" -eq 7 ]'
exit $fail
