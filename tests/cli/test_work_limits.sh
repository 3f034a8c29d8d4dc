#!/usr/bin/env bash
# Every limit counts the work. (a) A patch of 1024 noise bands held for 600 s is
# refused by render at 192 kHz (noise bands are counted: (0 partials + 1024 x 4) x 600 s x 192 kHz
# = 4.7e11 > 1e11) with exit 1, one line naming the noise bands and --max-work, nothing written;
# (b) keymap of 128 notes x 127 layers x 64 variants is refused before any render (--max-files);
# (c) keymap of the 1024-band patch cut to 60 s over 49 notes x 2 layers is refused by the set
# budget ((1 + 4096) x 60 s x 48 kHz x 98 = 1.16e12 > 1e12, --max-set-work); (d) report of a 301 s source is refused naming --max-input-s, and
# analyze --report of it writes the patch but no report, naming --max-report-s (exit 1).
source "$(dirname "$0")/preamble.sh"
bands_patch() {  # NAME LENGTH_S
  {
    printf 'format = "wane-patch"\nversion = 1\n\n[note]\nname = "bands"\nf0_hz = 220.0\nlength_s = %s\n' "$2"
    printf 'inharmonicity_b = 0.0\ngain_db = 0.0\n\n[source]\nfile = "none.wav"\nsample_rate_hz = 48000\nonset_s = 0.0\n\n'
    printf '[[partial]]\nfreq_hz = 220.0\nharmonic = 1\nphase_rad = 0.0\nattack_s = 0.002\npeak_db = -60.0\ndecay = [ { t60_s = 1.0 } ]\n\n'
    for i in $(seq 0 1023); do
      printf '[[noise]]\nlow_hz = %d.00\nhigh_hz = %d.00\nattack_s = 0.0010\npeak_db = -90.00\ndecay = [ { t60_s = inf } ]\n\n' \
        $((100 + i * 10)) $((110 + i * 10))
    done
  } > "$1.toml"
}
bands_patch bands600 600
bands_patch bands60 60
# refused LABEL PATTERN ARGS...
refused() {
  local label=$1 pattern=$2; shift 2
  "$wane" "$@" >out.txt 2>err.txt; local rc=$?
  echo "$label: exit $rc: $(head -c 400 err.txt)"
  [ $rc -eq 1 ] || { echo "FAIL: $label: exit $rc, want 1"; fail=1; }
  [ "$(wc -l <err.txt)" -eq 1 ] || { echo "FAIL: $label: not one line"; fail=1; }
  grep -q -- "^wane: error: .*$pattern" err.txt || { echo "FAIL: $label: no '$pattern'"; fail=1; }
}
refused "(a) render 1024 bands x 600 s x 192 kHz" "1024 noise bands.*--max-work" render bands600.toml -o a.wav --rate 192000
[ ! -e a.wav ] || { echo "FAIL: (a) a.wav written"; fail=1; }
refused "(b) keymap 128 x 127 x 64" "--max-files" keymap bands60.toml -o b --notes 0..127 --layers 127 --variants 64 \
  --layer-step-db 0.5 --layer-tilt-db-oct 0
[ ! -e b ] || { echo "FAIL: (b) folder b created"; fail=1; }
refused "(c) keymap of 49 notes x 2 layers, 60 s, 1024 bands" "--max-set-work" keymap bands60.toml -o c --notes C2..C6 --layers 2
[ ! -e c ] || { echo "FAIL: (c) folder c created"; fail=1; }
sox -n -r 8000 -b 16 long.wav synth 301 pluck 220 vol 0.5
"$wane" -q analyze long.wav -o long.toml 2>err.txt || { echo "FAIL: analyze of the 301 s note: $(cat err.txt)"; fail=1; }
refused "(d) report of 301 s" "--max-input-s" report long.wav long.toml -o long.html
[ ! -e long.html ] || { echo "FAIL: (d) long.html written"; fail=1; }
refused "(d) analyze --report of 301 s" "no report.*--max-report-s" analyze long.wav -o long2.toml --report
[ -s long2.toml ] && [ ! -e long2.html ] || { echo "FAIL: (d) analyze --report: patch missing or report written"; fail=1; }
[ $fail -eq 0 ] && echo "PASS"
exit $fail
