# The shared start of every CLI test (sourced): CTest runs `bash test_NAME.sh WANE_EXE SOURCE_DIR
# WORK_DIR`. Sets wane, src (absolute), work; starts in a fresh, empty WORK_DIR; fail=0; and
# check 'CONDITION' evaluates a shell condition, printing "ok: ..." or "FAIL: ..." (and fail=1).
set -u
wane=$1
src=$(cd "$2" && pwd)
work=$3
rm -rf "$work" && mkdir -p "$work" && cd "$work" || exit 1
fail=0
check() { if ! eval "$1"; then echo "FAIL: $1"; fail=1; else echo "ok: $1"; fi; }
# sox seeds its random generators (pluck, noise, dither) from the clock unless -R is given: every
# test's sox runs repeatable, so a test sees the same input on every run.
# (`sox --i` reads a header: it takes no other option first.)
sox() { if [ "${1:-}" = --i ]; then command sox "$@"; else command sox -R "$@"; fi; }
