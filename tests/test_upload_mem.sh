#!/usr/bin/env bash
# tests/test_upload_mem.sh - ulk modulate keeps to its memory guarantee on a long upload
# (docs/upload-format.md, "Reader and memory"): the timing table and the samples of a
# 200,000-command upload are written in under 64 MB resident, and they still equal those of
# a 3-command list that is the long list's beginning (same stream prefix, sample for sample,
# row for row).
#
# Why a variant of the demo dictionary: the demo link (5 sub-bits a bit, gap 8, 10 kHz
# subcarrier) makes 200,000 commands 74 million sub-bits, too many rows and samples for a
# test; 2-sub-bit patterns, gap 0 and a 2 kHz subcarrier keep the same words (W = 66) at
# 13 million sub-bits and 5 samples a sub-bit.
# It also checks rules of the streaming reader that a whole-file reader did not need.
#
# RSS is measured with /usr/bin/time (%M, maximum resident set in KB) in the plain build
# only: under ASan/UBSan the shadow memory makes it meaningless, so that build checks the
# equalities on a shorter list and prints the figures without asserting them.
set -u
ULK=${ULK:?ULK must name the ulk binary}
SRC=${ULK_SOURCE_DIR:?}
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
fail() { echo "FAIL: $*"; exit 1; }
LIMIT_KB=$((64 * 1000))   # 64 MB as the guarantee states it (10^6 bytes)

asan=0
grep -q __asan_init "$ULK" 2>/dev/null && asan=1
N=${UPLOAD_MEM_N:-200000}
[ $asan = 1 ] && N=${UPLOAD_MEM_N:-20000}

sed -e 's/zero: "00111"/zero: "01"/; s/one: "11000"/one: "10"/; s/idle: "01010"/idle: "00"/' \
    -e 's/frequency: 10000/frequency: 2000/; s/gap: 8/gap: 0/' \
    "$SRC/dictionaries/demo-subbit.yaml" > "$T/mem.yaml"
grep -q 'zero: "01"' "$T/mem.yaml" && grep -q 'gap: 0' "$T/mem.yaml" || fail "the demo dictionary changed; update the sed"

# the short list is the long list's beginning
{ echo "OBC_SET_MODE mode=STANDBY"; echo "wait 0.5s"; echo "OBC_SET_TIME seconds=1"; echo "OBC_SET_TIME seconds=2"; } > "$T/short.cmd"
{ cat "$T/short.cmd"; awk -v n="$N" 'BEGIN { for (i = 4; i <= n; i++) printf "OBC_SET_TIME seconds=%d\n", i }'; } > "$T/long.cmd"
"$ULK" compile -q --dict "$T/mem.yaml" "$T/short.cmd" -o "$T/short.ulku" 2>/dev/null || fail "short list does not compile"
"$ULK" compile -q --dict "$T/mem.yaml" "$T/long.cmd" -o "$T/long.ulku" 2>/dev/null || fail "long list does not compile"

# the prefix both streams share: everything of the short one but its postamble (n = 2)
sub_short=$("$ULK" inspect --json "$T/short.ulku" | /usr/bin/python3 -c 'import json,sys; print(json.load(sys.stdin)["totals"]["subbits"])')
post=$(sed -n 's/^ *postamble: *\([0-9]*\).*/\1/p' "$T/mem.yaml")
K=$((sub_short - 2 * post))
[ "$K" -gt 100 ] || fail "prefix of $K sub-bits"
RATE=10000   # the lowest rate the link takes: 2.5 x (2000 + 2000); 5 samples a sub-bit
S=$((K * RATE / 2000))

# timing table: rows of the prefix equal, row count = 1 + sub-bits, RSS
"$ULK" modulate "$T/short.ulku" --timing "$T/short.csv" --rate $RATE -q 2>/dev/null || fail "short timing table"
/usr/bin/time -o "$T/rss_timing" -f "%M %e" "$ULK" modulate "$T/long.ulku" --timing - --rate $RATE -q 2>"$T/err" \
    | awk -v k=$((K + 1)) -v out="$T/long_prefix.csv" 'NR <= k { print > out } END { print NR > "/dev/stderr" }' 2>"$T/rows" \
    || fail "long timing table: $(cat "$T/err")"
head -n $((K + 1)) "$T/short.csv" | cmp -s - "$T/long_prefix.csv" || fail "timing table rows of the shared prefix differ"
sub_long=$(cat "$T/rows")
# header + n * (P + 500 + N * W + T): gap 0, the 0.5 s wait is 500 idle patterns at 1000 bit/s
want_rows=$((1 + (32 + 500 + N * 66 + 8) * 2))
[ "$sub_long" = "$want_rows" ] || fail "long timing table has $sub_long lines, expected $want_rows"

# samples: raw f32 of the short upload; the long one's first S samples through a pipe
"$ULK" modulate "$T/short.ulku" -o "$T/short.f32" --rate $RATE -q 2>/dev/null || fail "short samples"
/usr/bin/time -o "$T/rss_mod" -f "%M %e" "$ULK" modulate "$T/long.ulku" -o /dev/stdout --format f32 --rate $RATE -q 2>"$T/err" \
    | { head -c $((4 * S)) > "$T/long_prefix.f32"; cat > /dev/null; } || fail "long samples: $(cat "$T/err")"
cmp -s "$T/long_prefix.f32" <(head -c $((4 * S)) "$T/short.f32") || fail "samples of the shared prefix differ"
[ "$(stat -c %s "$T/long_prefix.f32")" = $((4 * S)) ] || fail "long samples cut short"

# the streaming reader keeps the whole-file rules (docs/upload-format.md, "Reader and memory"):
#  - a changed byte that also breaks a command is reported as a change (digest first), not as the
#    parse error it causes; SHA-256 by Python's hashlib (FIPS 180-4) reseals the edited files;
#  - 'link' after 'commands' is refused by name; a command of more than 256 KiB is refused.
/usr/bin/python3 - "$T" <<'PY' || fail "could not build the edited uploads"
import hashlib, sys
t = sys.argv[1]
data = open(t + "/short.ulku", "rb").read()
head = b'  "digest": "sha256:'
body = data[:data.rindex(head)]
def reseal(b):
    return b + head + hashlib.sha256(b).hexdigest().encode() + b'"\n}\n'
i = body.index(b'"mnemonic": "OBC_SET_TIME"')
open(t + "/changed.ulku", "wb").write(data[:i] + b'"mnemonic" "OBC_SET_TIME"' + data[i + 26:])
a, c = body.index(b'  "link": {'), body.index(b'  "commands": [')
w = body.index(b'  "wait_after_s"')
open(t + "/order.ulku", "wb").write(reseal(body[:a] + body[c:w] + body[a:c] + body[w:]))
j = body.index(b'"args": [') + len(b'"args": [')
open(t + "/huge.ulku", "wb").write(reseal(body[:j] + b" " * (300 * 1024) + body[j:]))
PY
expect_refused() { # file message...
    local f=$1; shift
    "$ULK" inspect "$T/$f" >/dev/null 2>"$T/err" && fail "$f accepted"
    for m in "$@"; do grep -qF -- "$m" "$T/err" || fail "$f: no '$m' in: $(cat "$T/err")"; done
}
expect_refused changed.ulku "SHA-256 digest mismatch"
expect_refused order.ulku "'link' must come before 'commands'"
expect_refused huge.ulku "commands[0]" "longer than 262144 bytes"
"$ULK" modulate "$T/huge.ulku" -o "$T/huge.f32" --rate $RATE -q 2>/dev/null && fail "modulate took huge.ulku"
[ -e "$T/huge.f32" ] && fail "modulate left huge.f32 behind"

read -r kb_t s_t < "$T/rss_timing"
read -r kb_m s_m < "$T/rss_mod"
size=$(stat -c %s "$T/long.ulku")
echo "upload: $N commands, $size bytes, $((want_rows - 1)) sub-bits; prefix of $K sub-bits / $S samples equal"
echo "modulate --timing: max RSS $kb_t KB, $s_t s;  modulate at $RATE Hz: max RSS $kb_m KB, $s_m s"
if [ $asan = 1 ]; then
    echo "ASan build: RSS not asserted (shadow memory)"
else
    [ "$kb_t" -lt $LIMIT_KB ] || fail "modulate --timing took $kb_t KB, over 64 MB"
    [ "$kb_m" -lt $LIMIT_KB ] || fail "modulate took $kb_m KB, over 64 MB"
fi
echo "PASS"
