#!/bin/bash
# tests/test_roundtrip.sh - the compile / inspect command-line contract on the demo pair:
#  LIST -> compile -> inspect --list -> compile gives a byte-identical upload;
#  a changed byte is refused by inspect; a broken list or dictionary leaves no file behind;
#  usage and I/O errors exit 2.
set -u
ULK=${ULK:?ULK must name the ulk binary}
SRC=${ULK_SOURCE_DIR:?}
DICT=$SRC/dictionaries/demo-subbit.yaml
LIST=$SRC/dictionaries/demo-subbit.cmd
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
fail() { echo "FAIL: $*"; exit 1; }

"$ULK" compile --dict "$DICT" "$LIST" -o "$T/a.upl" > "$T/summary.txt" || fail "demo list does not compile"
grep -q "critical" "$T/summary.txt" || fail "summary lacks the critical commands"
mkdir "$T/again"
"$ULK" inspect --list "$T/a.upl" > "$T/again/demo-subbit.cmd" || fail "inspect --list"
"$ULK" compile -q --dict "$DICT" "$T/again/demo-subbit.cmd" -o "$T/b.upl" || fail "the printed list does not compile"
cmp "$T/a.upl" "$T/b.upl" || fail "LIST -> compile -> inspect --list -> compile is not identical"
# a third pass from the second upload, and the JSON dictionary gives the same words
"$ULK" inspect --list "$T/b.upl" | cmp - "$T/again/demo-subbit.cmd" || fail "second --list differs"
"$ULK" compile -q --dict "$SRC/dictionaries/demo-subbit.json" "$LIST" -o "$T/c.upl" || fail "JSON dictionary"
diff <("$ULK" inspect --json "$T/a.upl" | grep '"hex"') <("$ULK" inspect --json "$T/c.upl" | grep '"hex"') \
    || fail "YAML and JSON dictionaries give different words"

# inspect shows fields; --json parses and has hex for every word
"$ULK" inspect "$T/a.upl" > "$T/show.txt" || fail "inspect"
for w in vehicle system opcode check hex binary sub-bits start totals; do
    grep -q "$w" "$T/show.txt" || fail "inspect output lacks '$w'"
done
n=$(/usr/bin/python3 -c 'import json,sys; d=json.load(sys.stdin); print(len(d["words"]), all(len(w["hex"])==17 for w in d["words"]))' < <("$ULK" inspect --json "$T/a.upl"))
[ "$n" = "21 True" ] || fail "inspect --json: $n"

# tampering: flip one byte of a copy in the middle of the file
cp "$T/a.upl" "$T/t.upl"
sz=$(stat -c %s "$T/t.upl")
off=$((sz / 2))
b=$(dd if="$T/t.upl" bs=1 skip=$off count=1 2>/dev/null | od -An -tu1 | tr -d ' ')
printf "$(printf '\\%03o' $(( b ^ 1 )))" | dd of="$T/t.upl" bs=1 seek=$off conv=notrunc 2>/dev/null
cmp -s "$T/a.upl" "$T/t.upl" && fail "the copy was not changed"
"$ULK" inspect "$T/t.upl" > /dev/null 2> "$T/err.txt"
rc=$?
[ $rc -eq 1 ] || fail "tampered upload: exit $rc, expected 1"
grep -q "changed after it was written" "$T/err.txt" || fail "tampered upload: message: $(cat "$T/err.txt")"
"$ULK" inspect "$T/a.upl" > /dev/null || fail "the original no longer reads"

# a broken list: exit 1, all errors with file:line:col, no output file
printf 'OBC_NOOP\nOBC_SET_MOD mode=SAFE\nPROP_ARM arm=true key=1\nwait 3h\n' > "$T/bad.cmd"
"$ULK" compile --dict "$DICT" "$T/bad.cmd" -o "$T/bad.upl" 2> "$T/bad.txt"
rc=$?
[ $rc -eq 1 ] || fail "broken list: exit $rc"
[ -e "$T/bad.upl" ] && fail "broken list left an output file"
ls "$T" | grep -q tmp && fail "broken list left a temporary file"
grep -q "bad.cmd:2:1: error: .*did you mean 'OBC_SET_MODE'" "$T/bad.txt" || fail "no did-you-mean: $(cat "$T/bad.txt")"
grep -q "bad.cmd:3:1: error: .*critical" "$T/bad.txt" || fail "no critical refusal"
grep -q "bad.cmd:4:7: error: .*unknown wait unit" "$T/bad.txt" || fail "no wait error"
# an empty list
printf '# nothing\n' > "$T/empty.cmd"
"$ULK" compile --dict "$DICT" "$T/empty.cmd" -o "$T/e.upl" 2>/dev/null && fail "empty list accepted"
[ -e "$T/e.upl" ] && fail "empty list left a file"
# usage and I/O errors: exit 2
"$ULK" compile --dict "$DICT" -o "$T/x.upl" 2>/dev/null; [ $? -eq 2 ] || fail "missing LIST: not exit 2"
"$ULK" compile --dict "$T/none.yaml" "$LIST" -o "$T/x.upl" 2>/dev/null; [ $? -eq 2 ] || fail "missing dictionary: not exit 2"
"$ULK" compile --dict "$DICT" "$LIST" -o "$T/no/dir/x.upl" 2>/dev/null; [ $? -eq 2 ] || fail "unwritable output: not exit 2"
"$ULK" inspect "$T/none.upl" 2>/dev/null; [ $? -eq 2 ] || fail "missing upload: not exit 2"
"$ULK" inspect "$DICT" 2>/dev/null; [ $? -eq 1 ] || fail "a dictionary given as upload: not exit 1"
echo "roundtrip: all checks passed"
