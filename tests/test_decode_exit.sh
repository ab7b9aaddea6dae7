#!/bin/bash
# tests/test_decode_exit.sh - ulk decode's exit status and its one-line reason
# (docs/decode.md, "Exit codes"): 0 with a command accepted; 1 with "no command found" and why
# (no signal; words of another vehicle); the --json document stays one valid JSON document
# (written incrementally) with the words in order.
set -u
ULK=${ULK:-build/ulk}
SRC=${ULK_SOURCE_DIR:-.}
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
fail=0
check() { # check NAME CONDITION-RESULT MESSAGE
    if [ "$2" != 0 ]; then echo "FAIL: $1: $3"; fail=1; else echo "ok: $1"; fi
}
cp "$SRC/dictionaries/demo-subbit.yaml" "$SRC/dictionaries/demo-subbit.cmd" "$T/" || exit 1
cd "$T" || exit 1
"$ULK" compile --dict demo-subbit.yaml demo-subbit.cmd -o demo.upl -q || exit 1
"$ULK" modulate demo.upl -o demo.wav --rate 48000 -q 2>/dev/null || exit 1
# another vehicle: the same dictionary with vehicle address 0xA6 instead of 0xA7
sed 's/value: 0xA7/value: 0xA6/' demo-subbit.yaml >other.yaml
grep -q 'value: 0xA6' other.yaml || { echo "FAIL: could not make the other vehicle's dictionary"; exit 1; }

"$ULK" decode --dict demo-subbit.yaml demo.wav --json >ok.json 2>ok.err
rc=$?
check "accepted commands exit 0" $((rc != 0)) "exit $rc, stderr: $(cat ok.err)"
/usr/bin/python3 - <<'PY'
import json, sys
d = json.load(open("ok.json"))
n = sum(1 for w in d["words"] if w["status"] == "accepted")
starts = [w["start_s"] for w in d["words"]]
ok = n == 21 and starts == sorted(starts) and d["estimates"]["signal_found"] is True
print("ok: --json is one document, 21 accepted words in order" if ok else "FAIL: --json: %d accepted, order %s" % (n, starts == sorted(starts)))
sys.exit(0 if ok else 1)
PY
[ $? = 0 ] || fail=1

"$ULK" decode --dict other.yaml demo.wav >other.out 2>other.err
rc=$?
check "another vehicle's words exit 1" $((rc != 1)) "exit $rc"
check "another vehicle: one line on stderr" $(( $(wc -l <other.err) != 1 )) "stderr: $(cat other.err)"
grep -q "no command found: 21 words found, and none of the 21 intact ones matched the dictionary's vehicle and system addresses" other.err
check "another vehicle: the reason names the addresses" $? "stderr: $(cat other.err)"

/usr/bin/python3 - <<'PY'
import struct, wave
w = wave.open("silence.wav", "wb")
w.setnchannels(1); w.setsampwidth(2); w.setframerate(48000)
w.writeframes(struct.pack("<h", 0) * 48000)
w.close()
PY
"$ULK" decode --dict demo-subbit.yaml silence.wav --json >sil.json 2>sil.err
rc=$?
check "silence exits 1" $((rc != 1)) "exit $rc"
grep -qx "ulk decode: no command found: no signal in the capture" sil.err
check "silence: the reason says no signal" $? "stderr: $(cat sil.err)"
/usr/bin/python3 -c 'import json; d = json.load(open("sil.json")); assert d["words"] == [] and d["estimates"]["signal_found"] is False' 2>/dev/null
check "silence: --json still one document with no words" $? "$(cat sil.json)"
exit $fail
