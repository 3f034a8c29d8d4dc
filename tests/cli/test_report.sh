#!/usr/bin/env bash
# wane report through the CLI on a demo note: exit 0, one self-contained HTML file under 10 MB
# with every section, six spectrogram pictures and five embedded players; bad input gives exit 1,
# one `wane: error:` line and no HTML left behind.
source "$(dirname "$0")/preamble.sh"
max_bytes=10000000  # issue 20: under 10 MB for a 4 s note

cp "$src/demo-data/steel-string-d3.wav" note.wav || exit 1
"$wane" analyze note.wav -o note.toml > analyze.txt 2>&1; check '[ $? -eq 0 ]'

"$wane" report note.wav note.toml -o note.html > report.txt 2> report.err; rc=$?
check '[ $rc -eq 0 ]'
cat report.txt
check '[ -f note.html ]'
bytes=$(stat -c %s note.html 2>/dev/null || echo 0)
echo "report: $bytes bytes"
check '[ "$bytes" -gt 100000 ] && [ "$bytes" -lt $max_bytes ]'
# The summary line states the size it wrote.
check 'grep -q "report written in [0-9.]* s, $bytes bytes" report.txt'
check '[ ! -s report.err ]'
for id in summary spectrogram onset envelopes noise patch compare listen; do
    check "grep -q \"<section id='$id'\" note.html"
done
# source, copy, partials only, noise only (the demo string has noise bands), residual
check 'grep -q "^\[\[noise\]\]" note.toml'
check '[ "$(grep -o "data:audio/wav;base64," note.html | wc -l)" -eq 5 ]'
# source, copy, difference, each on a linear and a log frequency axis
check '[ "$(grep -o "data:image/png;base64," note.html | wc -l)" -eq 6 ]'
# No network: the only URL-like text is the SVG namespace name.
check '[ "$(grep -o "https\?://[^'"'"'\" ]*" note.html | sort -u)" = "http://www.w3.org/2000/svg" ]'
# The patch table of `wane info` is embedded.
check 'grep -q "$("$wane" info note.toml | sed -n 2p | sed "s/[[:space:]]\+/ /g; s/^ //" | cut -c1-20)" <(sed "s/[[:space:]]\+/ /g" note.html)'

# --top-hz: the spectrograms stop there (the linear axes' top tick 8000 Hz, no 20 kHz tick);
# a negative one is refused with exit 2.
"$wane" -q report note.wav note.toml -o top.html --top-hz 8000; check '[ $? -eq 0 ]'
sed -n "/<section id='spectrogram'/,/<section id='onset'/p" top.html > top-spectrograms.html
check 'grep -q ">8000</text>" top-spectrograms.html && ! grep -q ">20000</text>" top-spectrograms.html'
"$wane" report note.wav note.toml -o bad-top.html --top-hz -1 > /dev/null 2> top.err; rc=$?
check '[ $rc -eq 2 ] && grep -q "^wane: error: --top-hz -1" top.err'

# The rendered page (headless Chromium) is checked for every demo note in test_report_pages.sh.

# Bad input: exit 1, one error line, no HTML (and no temporary file) left behind.
expect_error() {  # name, then the command's arguments
    local name=$1; shift
    "$wane" "$@" > "$name.out" 2> "$name.err"; local code=$?
    echo "$name: exit $code: $(cat "$name.err")"
    check "[ $code -eq 1 ]"
    check "[ \$(wc -l < $name.err) -eq 1 ] && grep -q '^wane: error: ' $name.err"
}
expect_error missing report missing.wav note.toml -o missing.html
check 'grep -q "missing.wav" missing.err'
check '[ -z "$(ls missing.html* 2>/dev/null)" ]'

printf 'format = "wane-patch"\nversion = 1\n[note]\nf0_hz = "high"\n' > broken.toml
expect_error broken report note.wav broken.toml -o broken.html
check 'grep -q "broken.toml" broken.err'
check '[ -z "$(ls broken.html* 2>/dev/null)" ]'

cp note.toml keep.toml
expect_error overwrite report note.wav note.toml -o note.toml
check 'cmp -s note.toml keep.toml'

exit $fail
