#!/usr/bin/env bash
# A keymap set is written all or nothing. (a) A folder where a sample goes:
# refused before anything is rendered, exit 1, one error line naming it, nothing else written.
# (b) Disk full (a 2 MiB tmpfs, mounted when the test runs as root): a first set that fits is
# written; a second, larger set into the same folder fails with exit 1 and leaves the first set
# byte for byte (diff -r against a copy) and no hidden file; a set into a new folder on a full
# disk fails and leaves no folder. Part (b) is skipped (exit 77, reported by CTest as skipped)
# when the test is not root or cannot mount, since only root can mount a small file system.
source "$(dirname "$0")/preamble.sh"
mounted=""
cleanup() { [ -n "$mounted" ] && umount "$mounted"; }
trap cleanup EXIT
write_test_pluck pluck.toml "all or nothing" 0.25 "-12.0 0.002 [ { t60_s = 1.0 } ]"

# (a) A folder where a sample goes.
mkdir -p set-a/C3_v1_rr1.wav
"$wane" keymap pluck.toml -o set-a --notes C3..C4 --length-s 0.25 >out.txt 2>err.txt
rc=$?
echo "(a) exit $rc: $(cat err.txt)"
[ $rc -eq 1 ] || { echo "FAIL: (a) exit $rc, want 1"; fail=1; }
[ "$(wc -l <err.txt)" -eq 1 ] && grep -q '^wane: error: .*C3_v1_rr1.wav: is a folder' err.txt ||
  { echo "FAIL: (a) message"; fail=1; }
[ "$(ls -A set-a)" = "C3_v1_rr1.wav" ] || { echo "FAIL: (a) written: $(ls -A set-a)"; fail=1; }

# (b) Disk full.
if [ "$(id -u)" -ne 0 ]; then
  echo "SKIP (b): not root, so no small tmpfs can be mounted for the disk-full case"
  [ $fail -eq 0 ] && exit 77
  exit $fail
fi
mkdir -p full
if ! mount -t tmpfs -o size=2m tmpfs full 2>mount.err; then
  echo "SKIP (b): root, but mounting a tmpfs failed ($(cat mount.err)), e.g. in a container without CAP_SYS_ADMIN"
  [ $fail -eq 0 ] && exit 77
  exit $fail
fi
mounted=$PWD/full
# 13 notes x 0.25 s x 48 kHz x 3 bytes: about 0.5 MB, fits in 2 MiB.
"$wane" -q keymap pluck.toml -o full/set --notes C3..C4 --length-s 0.25 || { echo "FAIL: (b) first set"; fail=1; }
cp -a full/set first
echo "(b) first set: $(ls full/set | wc -l) files, $(du -sk full | cut -f1) KiB used"
# 3 layers x 3 variants of 25 notes: about 8 MB, cannot fit.
"$wane" keymap pluck.toml -o full/set --notes C3..C5 --layers 3 --variants 3 --length-s 0.25 >out.txt 2>err.txt
rc=$?
echo "(b) second set: exit $rc: $(head -c 300 err.txt)"
[ $rc -eq 1 ] || { echo "FAIL: (b) exit $rc, want 1"; fail=1; }
grep -q '^wane: error: ' err.txt || { echo "FAIL: (b) no error line"; fail=1; }
diff -r -q first full/set || { echo "FAIL: (b) the first set changed"; fail=1; }
left=$(find full -name '.*')
[ -z "$left" ] || { echo "FAIL: (b) left behind: $left"; fail=1; }
# A new folder on the full disk: fails, and the folder it would have created is gone.
dd if=/dev/zero of=full/filler bs=64k 2>/dev/null
"$wane" keymap pluck.toml -o full/new-set --notes C3..C4 --length-s 0.25 >out.txt 2>err.txt
rc=$?
echo "(b) new folder on a full disk: exit $rc: $(head -c 300 err.txt)"
[ $rc -eq 1 ] || { echo "FAIL: (b) new folder: exit $rc, want 1"; fail=1; }
[ ! -e full/new-set ] || { echo "FAIL: (b) full/new-set left: $(ls -A full/new-set)"; fail=1; }
[ $fail -eq 0 ] && echo "PASS"
exit $fail
