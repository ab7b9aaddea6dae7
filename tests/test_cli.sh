#!/usr/bin/env bash
# tests/test_cli.sh - the one command-line layer (src/cli/cli_common.c, docs/cli.md), through
# the program: help forms agree, --name=value works, '-' is standard input and output and
# never a file named '-', an interrupted run leaves no temporary file, --version is the CMake
# project version. Each check prints ok/FAIL with what it saw; "N passed, M failed" at the end.
#
# Env (from ctest): ULK (the binary), ULK_SOURCE_DIR.
set -u
ULK=${ULK:?ULK must name the ulk binary}
SRC=${ULK_SOURCE_DIR:?ULK_SOURCE_DIR must name the source folder}
DICT=$SRC/dictionaries/demo-subbit.yaml
LIST=$SRC/dictionaries/demo-subbit.cmd
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cd "$work" || exit 1
passed=0 failed=0
check() { # check WHAT CONDITION-EXIT [DETAIL]
  if [ "$2" -eq 0 ]; then passed=$((passed + 1)); echo "ok    $1"
  else failed=$((failed + 1)); echo "FAIL  $1${3:+: $3}"; fi
}

# ---- help: `ulk help CMD` prints exactly `ulk CMD --help` (and -h), exit 0
for c in validate compile inspect modulate impair decode verify plan spectrum; do
  a=$("$ULK" help "$c"); ra=$?
  b=$("$ULK" "$c" --help); rb=$?
  h=$("$ULK" "$c" -h); rh=$?
  [ $ra -eq 0 ] && [ $rb -eq 0 ] && [ $rh -eq 0 ] && [ -n "$a" ] && [ "$a" = "$b" ] && [ "$a" = "$h" ]
  check "help $c = $c --help = $c -h" $? "exit $ra/$rb/$rh"
done

# ---- --version: the project version of CMakeLists.txt
want=$(sed -n 's/^project(ulk VERSION \([0-9.]*\).*/\1/p' "$SRC/CMakeLists.txt")
got=$("$ULK" --version)
[ -n "$want" ] && [ "$got" = "ulk $want" ]
check "--version prints 'ulk $want' (CMakeLists.txt)" $? "got '$got'"

# ---- --name=value and --name value give the same result
"$ULK" compile --dict "$DICT" "$LIST" -o a.ulku -q 2>/dev/null
"$ULK" compile --dict="$DICT" "$LIST" --output=b.ulku --quiet 2>/dev/null
cmp -s a.ulku b.ulku
check "compile --dict=D --output=F is compile --dict D -o F" $?
"$ULK" modulate a.ulku --rate=48000 --timing=t1.csv -q 2>/dev/null
"$ULK" modulate a.ulku --rate 48000 --timing t2.csv -q 2>/dev/null
cmp -s t1.csv t2.csv && [ -s t1.csv ]
check "modulate --rate=R --timing=T" $?
"$ULK" plan "$DICT" --mode=full --pt-n0=60 --json >p1.json && "$ULK" plan "$DICT" --mode full --pt-n0 60 --json >p2.json
cmp -s p1.json p2.json && [ -s p1.json ]
check "plan --mode=M --pt-n0=X" $?
"$ULK" modulate a.ulku -o a.wav --rate 48000 -q 2>/dev/null
"$ULK" impair a.wav --output=i1.wav --ebn0=10 --dict="$DICT" --seed=3 -q 2>/dev/null
"$ULK" impair a.wav i2.wav --ebn0 10 --dict "$DICT" --seed 3 -q 2>/dev/null
cmp -s i1.wav i2.wav && [ -s i1.wav ]
check "impair --output=F --ebn0=X (and the older IN OUT form)" $?
"$ULK" decode --dict="$DICT" a.wav --json >d1.json 2>/dev/null && "$ULK" decode --dict "$DICT" a.wav --json >d2.json 2>/dev/null
cmp -s d1.json d2.json && [ -s d1.json ]
check "decode --dict=D" $?

# ---- '-' is standard input / output, never a file named '-'
"$ULK" compile --dict "$DICT" - -o c.ulku -q <"$LIST" 2>/dev/null
r=$?
"$ULK" inspect --list c.ulku >l1.txt && "$ULK" inspect --list a.ulku >l2.txt
# the first line names the source (<stdin> here), the commands must be the same
[ $r -eq 0 ] && [ "$(tail -n +2 l1.txt)" = "$(tail -n +2 l2.txt)" ] && head -n 1 l1.txt | grep -q '<stdin>'
check "compile - reads the list from standard input" $?
"$ULK" compile --dict "$DICT" "$LIST" -o - -q >s.ulku 2>/dev/null
r=$?
[ $r -eq 0 ] && [ ! -e ./- ] && cmp -s s.ulku a.ulku
check "compile -o - writes the upload to standard output, no file '-'" $?
"$ULK" inspect - <a.ulku >i1.txt && "$ULK" inspect a.ulku >i2.txt
[ "$(tail -n +2 i1.txt)" = "$(tail -n +2 i2.txt)" ]
check "inspect - reads the upload from standard input" $?
"$ULK" modulate a.ulku -o - --rate 48000 -q >raw.f32 2>/dev/null
r=$?
"$ULK" modulate a.ulku -o ref.f32 --rate 48000 -q 2>/dev/null
[ $r -eq 0 ] && [ ! -e ./- ] && cmp -s raw.f32 ref.f32
check "modulate -o - writes the raw samples to standard output" $?
"$ULK" modulate a.ulku --timing - --rate 48000 -q >t3.csv 2>/dev/null
cmp -s t3.csv t1.csv
check "modulate --timing - writes the table to standard output" $?
out=$("$ULK" modulate a.ulku -o - --timing - --rate 48000 2>&1 >/dev/null); r=$?
[ $r -eq 2 ] && case $out in *"cannot both go to standard output"*) true ;; *) false ;; esac
check "samples and table cannot both go to standard output" $? "$out"

"$ULK" decode --dict "$DICT" --json - <a.wav >dj1.json 2>/dev/null && "$ULK" decode --dict "$DICT" --json a.wav >dj2.json 2>/dev/null
r=$?
[ $r -eq 0 ] && [ "$(grep -v '"file"' dj1.json)" = "$(grep -v '"file"' dj2.json)" ] && [ -z "$(ls "${TMPDIR:-/tmp}"/ulk-stdin.* 2>/dev/null)" ]
check "decode - reads the capture from standard input (and leaves no copy)" $?
"$ULK" plan - --json <"$DICT" >pj1.json && "$ULK" plan "$DICT" --json >pj2.json
[ "$(grep -v '"file"' pj1.json)" = "$(grep -v '"file"' pj2.json)" ]
check "plan - reads the dictionary from standard input" $?
out=$("$ULK" verify --dict "$DICT" --upload - - <a.wav 2>&1); r=$?
[ $r -eq 2 ] && case $out in *"only one of the inputs"*) true ;; *) false ;; esac
check "only one input may be standard input" $? "$out"
# the CSV on standard output: the summary goes to standard error, nothing else on stdout
"$ULK" spectrum a.wav --csv - >sp.csv 2>sp.err
r=$?
[ $r -eq 0 ] && [ ! -e ./- ] && [ "$(head -n 1 sp.csv)" = "f_hz,power" ] && ! grep -q 'strongest' sp.csv &&
  grep -q '^strongest line: ' sp.err
check "spectrum --csv - writes the CSV to standard output, the summary to standard error" $? "exit $r"
# a raw capture with no telling name: --format cf32 makes the receiver read it as I/Q
"$ULK" modulate a.ulku --carrier --mode full --dict "$DICT" -o cx.cf32 --rate 96000 -q 2>/dev/null && cp cx.cf32 cx.raw
"$ULK" decode --dict "$DICT" --json cx.cf32 >cx1.json 2>/dev/null &&
  "$ULK" decode --dict "$DICT" --json cx.raw --rate 96000 --format cf32 --mode full >cx2.json 2>/dev/null
r=$?
[ $r -eq 0 ] && [ "$(grep -c '"accepted"' cx2.json)" -gt 0 ] && cmp -s cx1.json cx2.json
check "decode --format cf32 reads a raw file without a telling name as I/Q" $? "exit $r"
rm -f cx.cf32 cx.sigmf-meta cx.raw

# ---- calibration rounding is visible
err=$("$ULK" compile --dict "$DICT" "$LIST" -o r.ulku -q 2>&1 >/dev/null)
case $err in *"PROP_FIRE pulse: 0.12 s is encoded as 0.120272 s (raw 0x54"*) true ;; *) false ;; esac
check "compile warns naming the requested and the encoded value" $? "$err"
"$ULK" inspect r.ulku | grep -q 'pulse = 0.120272 s (list text 0.12)  raw 0x54 (unsigned, 8 bits'
check "inspect shows the encoded value, the list text beside it" $?
"$ULK" inspect r.ulku | grep -q 'check     crc16 0x[0-9A-F]\{4\}  ok' && ! "$ULK" inspect r.ulku | grep -q 'check     crc16 0x[0-9A-F]\{1,3\} '
check "inspect: CRC-16 in four hex digits" $?
"$ULK" inspect r.ulku | grep -q '(boolean, 1 bit at' && ! "$ULK" inspect r.ulku | grep -q ' 1 bits'
check "inspect: '1 bit', never '1 bits'" $?

# ---- an interrupted run leaves no temporary file (SIGINT and SIGTERM)
# A long output: 60 s of the demo at 8 MHz, 16-bit (about 190 MB if it ran to the end; it is
# interrupted after 0.5 s, when its temporary file must exist).
for sig in INT TERM; do
  rm -f long.* long.s16.tmp.*
  "$ULK" modulate a.ulku -o long.s16 --rate 8000000 -q 2>/dev/null &
  pid=$!
  seen=0
  for _ in $(seq 50); do
    sleep 0.05
    ls long.s16.tmp.* >/dev/null 2>&1 && { seen=1; break; }
  done
  sleep 0.3
  kill -s "$sig" "$pid" 2>/dev/null
  wait "$pid"; r=$?
  left=$(ls long.* 2>/dev/null | tr '\n' ' ')
  [ $seen -eq 1 ] && [ $r -ge 128 ] && [ -z "$left" ]
  check "SIG$sig during modulate: the temporary file existed and is gone" $? "seen $seen, exit $r, left '$left'"
done
for sig in INT TERM; do
  rm -f cx.* 
  "$ULK" modulate a.ulku --carrier --mode full --dict "$DICT" -o cx.cf32 --rate 4000000 -q 2>/dev/null &
  pid=$!
  seen=0
  for _ in $(seq 50); do
    sleep 0.05
    ls cx.cf32.tmp.* >/dev/null 2>&1 && { seen=1; break; }
  done
  kill -s "$sig" "$pid" 2>/dev/null
  wait "$pid"; r=$?
  left=$(ls cx.* 2>/dev/null | tr '\n' ' ')
  [ $seen -eq 1 ] && [ $r -ge 128 ] && [ -z "$left" ]
  check "SIG$sig during modulate --carrier: no temporary file left" $? "seen $seen, exit $r, left '$left'"
done

echo "$passed passed, $failed failed"
[ "$failed" -eq 0 ]
