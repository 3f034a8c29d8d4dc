#!/usr/bin/env bash
# Bad audio input to `wane analyze`: each kind must fail with exit code 1, exactly one stderr
# line "wane: error: ..." naming the bad file (and saying what is wrong), and no output file.
# The bad files are made here: a good 16-bit WAV from sox (an independent writer), cut, patched
# or replaced by bytes laid out by hand (RIFF WAVE layout, 44-byte canonical header).
source "$(dirname "$0")/preamble.sh"
mkdir -p bad

le16() { printf "\\x$(printf %02x $(($1 & 255)))\\x$(printf %02x $((($1 >> 8) & 255)))"; }
le32() { le16 $(($1 & 65535)); le16 $((($1 >> 16) & 65535)); }
# wav_header FORMAT_TAG CHANNELS RATE BITS DATA_BYTES
wav_header() {
  local tag=$1 ch=$2 rate=$3 bits=$4 n=$5
  local align=$((ch * bits / 8))
  printf 'RIFF'; le32 $((36 + n)); printf 'WAVEfmt '; le32 16; le16 "$tag"; le16 "$ch"
  le32 "$rate"; le32 $((rate * align)); le16 "$align"; le16 "$bits"; printf 'data'; le32 "$n"
}

sox -n -r 48000 -b 16 -c 1 good.wav synth 0.5 sine 440 vol 0.5 || { echo "FAIL: sox"; exit 1; }
sox -n -r 48000 -b 16 -c 2 bad/stereo.wav synth 0.5 sine 440 vol 0.5 || { echo "FAIL: sox"; exit 1; }
size=$(stat -c %s good.wav)

mkdir bad/folder.wav
printf 'This is not audio, only a few words of text.\n' > bad/text.wav
: > bad/empty.wav
wav_header 1 1 48000 16 0 > bad/no_frames.wav
head -c $((44 + (size - 44) / 2)) good.wav > bad/truncated.wav
{ wav_header 3 1 48000 32 16; printf '\x00\x00\x80\x3e\x00\x00\xc0\x7f\x00\x00\x80\x3e\x00\x00\x80\x3e'; } > bad/nan.wav
{ wav_header 3 1 48000 32 16; printf '\x00\x00\x80\x3e\x00\x00\x80\x3e\x00\x00\x80\xff\x00\x00\x80\x3e'; } > bad/inf.wav
cp good.wav bad/fast.wav
le32 1000000000 | dd of=bad/fast.wav bs=1 seek=24 conv=notrunc status=none

# expect_error LABEL KEYWORD NAMED_PATH ARGS...: exit 1, one "wane: error:" line naming
# NAMED_PATH and containing KEYWORD, no out.toml.
expect_error() {
  local label=$1 keyword=$2 named=$3
  shift 3
  rm -f out.toml
  "$wane" analyze "$@" >stdout.txt 2>stderr.txt
  local rc=$?
  local lines
  lines=$(wc -l < stderr.txt)
  echo "$label: exit $rc, stderr: $(head -c 300 stderr.txt)"
  [ "$rc" -eq 1 ] || { echo "FAIL: $label: exit code $rc, expected 1"; fail=1; }
  [ "$lines" -eq 1 ] || { echo "FAIL: $label: $lines stderr lines, expected 1"; fail=1; }
  grep -q '^wane: error: ' stderr.txt || { echo "FAIL: $label: no 'wane: error:' line"; fail=1; }
  grep -qF -- "$named" stderr.txt || { echo "FAIL: $label: message does not name '$named'"; fail=1; }
  grep -qF -- "$keyword" stderr.txt || { echo "FAIL: $label: message does not say '$keyword'"; fail=1; }
  [ ! -e out.toml ] || { echo "FAIL: $label: out.toml was written"; fail=1; }
  # No temporary output left behind either.
  if ls -A | grep -q '\.tmp$'; then echo "FAIL: $label: temporary file left behind"; fail=1; fi
}

expect_error missing "no such file" bad/missing.wav bad/missing.wav -o out.toml
expect_error directory "directory" bad/folder.wav bad/folder.wav -o out.toml
expect_error text "not a readable audio file" bad/text.wav bad/text.wav -o out.toml
expect_error empty "empty" bad/empty.wav bad/empty.wav -o out.toml
expect_error no-frames "zero" bad/no_frames.wav bad/no_frames.wav -o out.toml
expect_error truncated "truncated" bad/truncated.wav bad/truncated.wav -o out.toml
expect_error nan "NaN" bad/nan.wav bad/nan.wav -o out.toml
expect_error inf "infinite" bad/inf.wav bad/inf.wav -o out.toml
expect_error rate "1000000000 Hz" bad/fast.wav bad/fast.wav -o out.toml
expect_error channel "--channel 3 but file has 2 channels" bad/stereo.wav bad/stereo.wav --channel 3 -o out.toml
# An unwritable output folder: the message names the output path.
expect_error out-folder "does not exist" no/such/folder/out.toml good.wav -o no/such/folder/out.toml
[ ! -e no ] || { echo "FAIL: out-folder: a folder was created"; fail=1; }

exit $fail
