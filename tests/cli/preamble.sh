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
# expect_error CODE PATTERN cmd...: exit CODE, and stderr one line matching "wane: error: .*PATTERN"
# (a test that checks more than that defines its own expect_error after sourcing this file).
expect_error() {
  local code=$1 pattern=$2; shift 2
  "$@" >out.txt 2>err.txt; local rc=$?
  if [ $rc -ne "$code" ]; then echo "FAIL: exit $rc (want $code): $*"; cat err.txt; fail=1; return; fi
  if [ "$(wc -l <err.txt)" -ne 1 ] || ! grep -q -- "^wane: error: .*$pattern" err.txt; then
    echo "FAIL: stderr of '$*' is not one line matching '$pattern':"; cat err.txt; fail=1; return
  fi
  echo "ok: $* -> $(cat err.txt)"
}
# near A B TOL: |A - B| <= TOL
near() { awk -v a="$1" -v b="$2" -v t="$3" 'BEGIN { d = a - b; if (d < 0) d = -d; exit !(d <= t) }'; }
# sox seeds its random generators (pluck, noise, dither) from the clock unless -R is given: every
# test's sox runs repeatable, so a test sees the same input on every run.
# (`sox --i` reads a header: it takes no other option first.)
sox() { if [ "${1:-}" = --i ]; then command sox "$@"; else command sox -R "$@"; fi; }
# write_test_pluck FILE NAME LENGTH_S "PEAK_DB ATTACK_S DECAY"...: a version-1 patch of a 220 Hz
# note whose k-th partial argument is harmonic k (220 k Hz, phase 0.5 (k - 1) rad), DECAY being its
# TOML segment list, e.g. "-12.0 0.004 [ { t60_s = 1.9, until_s = 0.2 }, { t60_s = 6.4 } ]".
write_test_pluck() {
  local file=$1 name=$2 length_s=$3 k=0 peak attack decay spec; shift 3
  {
    printf 'format = "wane-patch"\nversion = 1\n\n[note]\nname = "%s"\nf0_hz = 220.0\nlength_s = %s\n' "$name" "$length_s"
    printf 'inharmonicity_b = 0.0\ngain_db = 0.0\n\n[source]\nfile = "none.wav"\nsample_rate_hz = 48000\nonset_s = 0.0\n'
    for spec in "$@"; do
      k=$((k + 1))
      read -r peak attack decay <<<"$spec"
      printf '\n[[partial]]\nfreq_hz = %d.0\nharmonic = %d\nphase_rad = %s\nattack_s = %s\npeak_db = %s\ndecay = %s\n' \
        $((220 * k)) "$k" "$(awk -v k="$k" 'BEGIN { printf "%.1f", 0.5 * (k - 1) }')" "$attack" "$peak" "$decay"
    done
  } > "$file"
}
# refused LABEL INPUT COPY PATTERN ARGS...: `wane ARGS` exits 1 with one error line matching
# PATTERN, and leaves INPUT as it was (cmp with COPY, made before).
refused() {
  local label=$1 input=$2 copy=$3 pattern=$4
  shift 4
  "$wane" "$@" >stdout.txt 2>stderr.txt
  local rc=$?
  echo "$label: exit $rc, stderr: $(head -c 200 stderr.txt)"
  [ "$rc" -eq 1 ] || { echo "FAIL: $label: exit $rc, expected 1"; fail=1; }
  [ "$(wc -l < stderr.txt)" -eq 1 ] || { echo "FAIL: $label: not one stderr line"; fail=1; }
  grep -q "^wane: error: .*$pattern" stderr.txt || { echo "FAIL: $label: no refusal message"; fail=1; }
  cmp -s "$input" "$copy" || { echo "FAIL: $label: $input was modified"; fail=1; }
}
