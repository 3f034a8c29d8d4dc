#!/usr/bin/env bash
# tools/tidy_scope.py (CI's clang-tidy runs only where src/ changed since a clean commit): in a
# small git repository, a changed header brings every file that includes it (directly or through
# another header), a changed source only itself, and a change to the rules (.clang-tidy, a
# CMakeLists.txt) or an unknown base commit brings every file.
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
exit $fail
