#!/usr/bin/env bash
# The report of every demo note (demo-data/*.wav) through the CLI, opened in headless Chromium
# with no network: the page's own script runs (it marks <body data-ready='yes'>), every section
# is in the rendered DOM, the screenshot has page content; each page is one file under 10 MB with
# no http(s) reference but the SVG namespace name, and holds the headline and the players.
# Skipped (with a note) where /usr/bin/chromium is missing.
source "$(dirname "$0")/preamble.sh"
max_bytes=10000000  # issue 20: under 10 MB for a 4 s note
chromium=/usr/bin/chromium

run_chromium() {  # output option, page
    local profile
    profile=$(mktemp -d "$work/chromium-profile.XXXXXX")
    timeout 120 "$chromium" --headless --no-sandbox --disable-gpu --disable-quic --no-first-run \
        --disable-background-networking --disable-component-update --disable-sync --disable-extensions \
        --proxy-server=127.0.0.1:9 --user-data-dir="$profile" --window-size=1100,1600 "$1" "file://$2" 2> chromium.log
    rm -rf "$profile"
}

for wav in "$src"/demo-data/*.wav; do
    stem=$(basename "$wav" .wav)
    cp "$wav" "$stem.wav"
    "$wane" -q analyze "$stem.wav" -o "$stem.toml"; check '[ $? -eq 0 ]'
    "$wane" report "$stem.wav" "$stem.toml" -o "$stem.html" > "$stem.txt" 2>&1; check '[ $? -eq 0 ]'
    bytes=$(stat -c %s "$stem.html" 2>/dev/null || echo 0)
    partials=$(grep -c '^\[\[partial\]\]' "$stem.toml")
    seconds=$(soxi -D "$stem.wav" 2>/dev/null || echo "?")
    echo "$stem: $seconds s, $partials partials, page $bytes bytes"
    check '[ "$bytes" -gt 100000 ] && [ "$bytes" -lt $max_bytes ]'
    check '[ "$(grep -o "https\?://[^'"'"'\" ]*" "$stem.html" | sort -u)" = "http://www.w3.org/2000/svg" ]'
    check '! grep -q "<script src\|<link\|@import\|url(http" "$stem.html"'
    check 'grep -q "<p id='"'"'headline'"'"'><b>fidelity: log-spectral distance [0-9.]* dB" "$stem.html"'
    for player in play-source play-copy play-partials play-residual play-solo; do
        check "grep -q \"<p id='$player'>\" $stem.html"
    done
    check '[ "$(grep -o "<svg class='"'"'envelope'"'"'" "$stem.html" | wc -l)" -eq $(( partials + $(grep -c "^\[\[noise\]\]" "$stem.toml") )) ]'
    if [ -x "$chromium" ]; then
        run_chromium --dump-dom "$work/$stem.html" > "$stem.dom"
        check 'grep -q "<body data-ready=\"yes\"" "$stem.dom"'
        for id in summary spectrogram onset envelopes noise patch compare listen; do
            check "grep -q '<section id=\"$id\"' $stem.dom"
        done
        run_chromium --screenshot="$work/$stem.png" "$work/$stem.html" > /dev/null
        check '[ -s "$stem.png" ]'
        python3 "$src/tests/cli/screenshot_check.py" "$stem.png" || fail=1
    else
        echo "note: $chromium not found; the headless rendering checks are skipped"
    fi
done
# The page's partial renderer: partial 1 of patches/glass-tine.toml (peak -10.00 dBFS after a
# 0.5 ms attack, 1046.5 Hz, gain 0 dB) rendered by the script in Chromium peaks at -10.00 dBFS
# within 0.05 dB (the sample grid misses the cosine's crest by at most 1 - cos(pi f / rate):
# 0.02 dB; the decay over the first period: 0.01 dB).
if [ -x "$chromium" ]; then
    "$wane" -q render "$src/patches/glass-tine.toml" -o tine.wav; check '[ $? -eq 0 ]'
    "$wane" -q report tine.wav "$src/patches/glass-tine.toml" -o tine.html; check '[ $? -eq 0 ]'
    run_chromium --dump-dom "$work/tine.html#check-solo" > tine.dom
    peak=$(sed -n 's/.*data-solo-peak-db="\([-0-9.]*\)".*/\1/p' tine.dom | head -1)
    echo "partial 1 of glass-tine rendered in the page: peak ${peak:-none} dBFS (patch: -10.00)"
    check '[ -n "$peak" ] && awk -v p="$peak" "BEGIN { exit !(p > -10.05 && p < -9.95) }"'
    # The whole envelope, frequency and phase: the first 8 partials of the demo string's patch
    # (fitted, several segments each) as the page renders them, at 64 instants over the note,
    # against the C++ renderer's render of each partial alone (wane render of a patch holding only
    # that partial, 32-bit float, no noise). Within 1e-4 of the partial's peak amplitude (-80 dB;
    # the C++ kernels run float phasors re-anchored every 1024 samples, the page doubles); the
    # renderer's end fade (last 10 ms) and band-limit fade (above 0.95 Nyquist) are the page's
    # stated omissions, so instants in the fade and partials in the fade band are left out.
    run_chromium --dump-dom "$work/steel-string-d3.html#check-solo" > string-solo.dom
    /usr/bin/python3 - steel-string-d3.toml string-solo.dom "$wane" <<'PY' || fail=1
import html, json, re, subprocess, sys
import numpy as np, scipy.io.wavfile as w
toml, dom, wane = sys.argv[1:4]
m = re.search(r'data-solo-samples="([^"]*)"', open(dom).read())
if not m:
    print("FAIL: the page published no partial samples"); sys.exit(1)
page = json.loads(html.unescape(m.group(1)))
text = open(toml).read()
blocks = re.split(r'(?m)^(?=\[\[)', text)
head = blocks[0]
partials = [b for b in blocks if b.startswith("[[partial]]")]
rate = int(re.search(r'(?m)^sample_rate_hz = (\d+)', text).group(1))
bad = 0
for i, samples in enumerate(page):
    freq = float(re.search(r'(?m)^freq_hz = ([-0-9.e+]+)', partials[i]).group(1))
    segments = partials[i].count("t60_s")
    if freq >= 0.95 * rate / 2:
        print(f"   partial {i + 1}: {freq:.1f} Hz in the band-limit fade, left out"); continue
    open(f"solo{i}.toml", "w").write(head + partials[i])
    subprocess.run([wane, "-q", "render", f"solo{i}.toml", "-o", f"solo{i}.wav", "--bits", "32f", "--no-noise",
                    "--rate", str(rate)], check=True)
    _, x = w.read(f"solo{i}.wav")
    x = x.astype(np.float64)
    peak_amp = 10 ** (float(re.search(r'(?m)^peak_db = ([-0-9.]+)', partials[i]).group(1)) / 20) \
        * 10 ** (float(re.search(r'(?m)^gain_db = ([-0-9.]+)', head).group(1)) / 20)
    fade_from = len(x) - int(round(0.010 * rate))
    worst = max(abs(v - x[k]) for k, v in samples if k < fade_from)
    ok = worst <= 1e-4 * peak_amp
    print(("ok   " if ok else "FAIL ") + f"partial {i + 1}: {freq:.1f} Hz, {segments} segments: page vs C++ render, "
          f"largest difference {20 * np.log10(max(worst, 1e-20) / peak_amp):.1f} dB re its peak (limit -80 dB)")
    bad |= not ok
sys.exit(bad)
PY
fi
exit $fail
