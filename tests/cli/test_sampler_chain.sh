#!/usr/bin/env bash
# A keymap set plays right in a third-party sampler chain. The set (two real notes from
# tests/data/real-notes, licence beside them, keys between them interpolated) is converted to SF2 by the Debian package polyphone
# (its SFZ importer) and played by the Debian package fluidsynth from MIDI files written here
# (tests/cli/sampler_chain.py). Checked on the audio: a held note has one onset (no re-trigger); a
# note released after 0.15 s still sounds 0.3 s later at wane's own WAV's level within 3 dB; the
# soft velocity is quieter and darker than the hard one; each played key's partials lie within
# 1 cent of the recording's times (key frequency / patch root) (tests/cli/pitch_check.py to-note).
# Without polyphone or fluidsynth the test skips (exit 77) and says why; with CI=true it fails.
source "$(dirname "$0")/preamble.sh"
py=/usr/bin/python3
chain="$src/tests/cli/sampler_chain.py"
missing=()
for tool in polyphone fluidsynth; do command -v "$tool" >/dev/null || missing+=("$tool"); done
if ((${#missing[@]})); then
  if [ "${CI:-}" = "true" ]; then
    echo "FAIL: ${missing[*]} not installed (apt-get install polyphone fluidsynth); CI=true, so no skip"; exit 1
  fi
  echo "SKIP: ${missing[*]} not installed (apt-get install polyphone fluidsynth)"; exit 77
fi
notes="$src/tests/data/real-notes"
check '"$wane" -q analyze "$notes/guitar_nylon_d3.wav" -o guitar.toml'
check '"$wane" -q analyze "$notes/banjo_g3.wav" -o banjo.toml'
# Roots D3 (50, guitar) and G3 (55, banjo); rendered D3, E3, F#3 (interpolated), G3; D#3 (51) is
# played from the D3 sample, shifted by the sampler.
check '"$wane" -q keymap guitar.toml banjo.toml -o set --notes D3..G3 --every 2 --layers 2 --until-db -60'
check 'grep -q "^<global> loop_mode=one_shot" set/set.sfz'
check 'grep -q "^E3_v2_rr1.wav .*0.600 x guitar.toml at D3 + 0.400 x banjo.toml at G3" set/set.plan.txt'
mkdir -p sf2
check 'QT_QPA_PLATFORM=offscreen polyphone -1 -i set/set.sfz -d sf2 -o guitar >polyphone.log 2>&1 && [ -s sf2/guitar.sf2 ]'
sample_s=$($py -c 'import sys, scipy.io.wavfile as w, warnings; warnings.simplefilter("ignore")
r, x = w.read(sys.argv[1]); print(len(x) / r)' set/D3_v2_rr1.wav)
# play NAME KEY VELOCITY OFF_S END_S: MIDI file, then fluidsynth (no reverb or chorus) at 48 kHz.
play() {
  $py "$chain" midi "$1.mid" "$2" "$3" 0 "$4" "$5" &&
  fluidsynth -ni -q -R 0 -C 0 -g 0.5 -r 48000 -F "$1.wav" sf2/guitar.sf2 "$1.mid" >"$1.log" 2>&1 && [ -s "$1.wav" ]
}
held_off=$($py -c "print(float('$sample_s') + 1.0)")
check 'play held 50 100 "$held_off" "$held_off"'
check '$py "$chain" held held.wav "$sample_s"'
# Control: the same set with its samples looping from start to end re-triggers the held note, and
# the onset count sees it.
sed 's/loop_mode=one_shot/loop_mode=loop_continuous/' set/set.sfz >set/looped.sfz
check 'QT_QPA_PLATFORM=offscreen polyphone -1 -i set/looped.sfz -d sf2 -o looped >>polyphone.log 2>&1'
check '$py "$chain" midi looped.mid 50 100 0 "$held_off" "$held_off" &&
       fluidsynth -ni -q -R 0 -C 0 -g 0.5 -r 48000 -F looped.wav sf2/looped.sf2 looped.mid >looped.log 2>&1'
check '! $py "$chain" held looped.wav "$sample_s"'
check 'play short 50 110 0.15 1.0'
check '$py "$chain" short short.wav set/D3_v2_rr1.wav 0.15'
check 'play soft 50 30 1.0 1.0 && play hard 50 120 1.0 1.0'
check '$py "$chain" dynamics soft.wav hard.wav'
for spec in "50 guitar_nylon_d3 guitar" "51 guitar_nylon_d3 guitar" "55 banjo_g3 banjo"; do
  read -r key wav patch <<<"$spec"
  check 'play "key$key" $key 120 1.5 1.5'
  check '$py "$src/tests/cli/pitch_check.py" to-note "$notes/$wav.wav" $patch.toml "key$key.wav" $key'
done
exit $fail
