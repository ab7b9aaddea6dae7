#!/bin/bash
# tests/test_verify_report.sh - what ulk verify and ulk decode show an operator
# (docs/decode.md, "verify report"): missing, extra and changed commands named with their
# fields; a changed field as sent (encoded value, the upload's list text beside it where it
# reads differently, raw field in fixed-width hex) against received; no empty bracket for a
# rejected word; times to the microsecond in both JSON documents; "1 word", not "1 words".
# The encoded float32 values are computed here apart from ulk: IEEE 754-2008 binary32
# (section 3.4) rounding of the decimal, through Python's struct module, printed as the
# shortest decimal that reads back as the same double (Python's repr, section "Floating Point
# Arithmetic" of the Python tutorial).
set -u
ULK=${ULK:-build/ulk}
SRC=${ULK_SOURCE_DIR:-.}
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
fail=0
check() { # check NAME STATUS MESSAGE: STATUS 0 passes
    if [ "$2" != 0 ]; then echo "FAIL: $1: $3"; fail=1; else echo "ok: $1"; fi
}
cp "$SRC/dictionaries/demo-subbit.yaml" "$T/" || exit 1
cd "$T" || exit 1
# sent: five commands; received: kp changed, CAM_EXPOSURE missing, PWR_SWITCH extra
printf 'OBC_NOOP\nTHERM_SETPOINT zone=BATTERY setpoint=21.5degC\nADCS_SET_GAIN kp=2.5e-2\nCAM_EXPOSURE exposure=12.5ms\nOBC_SET_MODE mode=SURVEY\n' >sent.cmd
printf 'OBC_NOOP\nTHERM_SETPOINT zone=BATTERY setpoint=21.5degC\nADCS_SET_GAIN kp=0.05\nOBC_SET_MODE mode=SURVEY\nPWR_SWITCH channel=HEATERS state=on\n' >recv.cmd
for f in sent recv; do
    "$ULK" compile --dict demo-subbit.yaml $f.cmd -o $f.upl -q || { echo "FAIL: compile $f.cmd"; exit 1; }
done
"$ULK" modulate recv.upl -o recv.wav --rate 48000 -q 2>/dev/null || { echo "FAIL: modulate"; exit 1; }

# the values ulk must show, computed apart from it
read -r KP1 KP2 EXP RAW1 RAW2 < <(/usr/bin/python3 -c '
import struct
f = lambda x: struct.unpack("<f", struct.pack("<f", x))[0]
raw = lambda x: struct.unpack("<I", struct.pack("<f", x))[0]
print(repr(f(0.025)), repr(f(0.05)), repr(f(0.0125)), "0x%08X" % raw(0.025), "0x%08X" % raw(0.05))')

"$ULK" verify --dict demo-subbit.yaml --upload sent.upl recv.wav >v.txt 2>v.err
rc=$?
check "a capture that differs exits 1" $((rc != 1)) "exit $rc, stderr: $(cat v.err)"
grep -qxF "  changed  word 3 (line 3) at 0.180000 s: ADCS_SET_GAIN kp=${KP1}N*m/rad (list text 0.025N*m/rad)" v.txt
check "changed: the sent command with its encoded value and list text" $? "$(cat v.txt)"
grep -qxF "           kp: sent ${KP1}N*m/rad (list text 0.025, raw $RAW1), received ${KP2}N*m/rad (raw $RAW2)" v.txt
check "changed: field by field, sent vs received, raw fields in fixed-width hex" $? "$(cat v.txt)"
grep -qxF "  missing  word 4 (line 4): CAM_EXPOSURE exposure=${EXP}s (list text 0.0125s)" v.txt
check "missing: the command with its fields" $? "$(cat v.txt)"
grep -qxF "  extra    at 0.328000 s: PWR_SWITCH channel=HEATERS state=true" v.txt
check "extra: the command with its fields" $? "$(cat v.txt)"
grep -qxF "NOT VERIFIED: 3 matched, 1 missing, 1 extra, 1 changed, 0 rejected" v.txt
check "the totals line" $? "$(cat v.txt)"

"$ULK" verify --dict demo-subbit.yaml --upload sent.upl recv.wav --json >v.json 2>/dev/null
KP1=$KP1 KP2=$KP2 RAW1=$RAW1 RAW2=$RAW2 /usr/bin/python3 - <<'PY'
import json, os, re, sys
txt = open("v.json").read()
d = json.loads(txt)
bad = []
times = re.findall(r'"start_s":\s*([-0-9.eE+]+)', txt)
if not times or any(not re.fullmatch(r"\d+\.\d{6}", t) for t in times):
    bad.append("start_s not to the microsecond: %s" % times)
c = d["changed"][0]["fields"][0]
want = {"field": "kp", "sent": os.environ["KP1"], "sent_list_text": "0.025", "received": os.environ["KP2"],
        "raw_sent": os.environ["RAW1"], "raw_received": os.environ["RAW2"]}
if c != want: bad.append("changed field %s, expected %s" % (c, want))
if d["missing"][0]["text"] != "CAM_EXPOSURE exposure=%ss (list text 0.0125s)" % repr(0.012500000186264515):
    bad.append("missing text %r" % d["missing"][0]["text"])
if d["extra"][0]["text"] != "PWR_SWITCH channel=HEATERS state=true": bad.append("extra text %r" % d["extra"][0]["text"])
print("FAIL: verify --json: " + "; ".join(bad) if bad else "ok: verify --json: times to the microsecond, fields sent vs received")
sys.exit(1 if bad else 0)
PY
[ $? = 0 ] || fail=1

"$ULK" decode --dict demo-subbit.yaml recv.wav --json >d.json 2>/dev/null
KP2=$KP2 /usr/bin/python3 - <<'PY'
import json, os, re, sys
txt = open("d.json").read()
d = json.loads(txt)
times = re.findall(r'"start_s":\s*([-0-9.eE+]+)', txt)
ok = len(times) == 5 and all(re.fullmatch(r"\d+\.\d{6}", t) for t in times)
ok = ok and repr(d["words"][2]["args"]["kp"]) == os.environ["KP2"]
print("ok: decode --json: times to the microsecond, kp the encoded float32" if ok else "FAIL: decode --json: times %s, kp %r" % (times, d["words"][2]["args"].get("kp")))
sys.exit(0 if ok else 1)
PY
[ $? = 0 ] || fail=1
"$ULK" decode --dict demo-subbit.yaml recv.wav >d.txt 2>/dev/null
grep -qE "^ +0\.180000 s  ADCS_SET_GAIN kp=${KP2}N\*m/rad +# margin" d.txt
check "decode: the encoded value of a float32 field" $? "$(cat d.txt)"

# another vehicle's words: every one rejected, each line with its reason and the bits as read
sed 's/value: 0xA7/value: 0xA6/' demo-subbit.yaml >other.yaml
"$ULK" compile --dict other.yaml recv.cmd -o other.upl -q && "$ULK" modulate other.upl -o other.wav --rate 48000 -q 2>/dev/null
"$ULK" verify --dict demo-subbit.yaml --upload sent.upl other.wav >o.txt 2>/dev/null
n=$(grep -cE '^  rejected word at [0-9]+\.[0-9]{6} s \(vehicle\): wrong vehicle address 0xA6 \(this dictionary.s vehicle is 0xA7\) \[hex [0-9A-F]{17}\]$' o.txt)
check "rejected: five lines with reason and hex" $((n != 5)) "$(cat o.txt)"
! grep -qE '\[(hex|data) \]' o.txt
check "rejected: no empty bracket" $? "$(cat o.txt)"
grep -qxF "  missing  word 2 (line 2): THERM_SETPOINT zone=BATTERY setpoint=21.5degC" o.txt
check "missing: an encoded value equal to its list text has no list text beside it" $? "$(cat o.txt)"

# one word: singular everywhere
printf 'OBC_NOOP\n' >one.cmd
"$ULK" compile --dict demo-subbit.yaml one.cmd -o one.upl -q && "$ULK" modulate one.upl -o one.wav --rate 48000 -q 2>/dev/null
"$ULK" verify --dict demo-subbit.yaml --upload one.upl one.wav >one.txt 2>&1
grep -qxF "one.wav against one.upl: 1 upload word, 1 accepted, 0 rejected in the capture" one.txt &&
    grep -qxF "VERIFIED: the capture holds exactly the upload's 1 word, in order" one.txt
check "verify: 1 word, not 1 words or word(s)" $? "$(cat one.txt)"
"$ULK" decode --dict demo-subbit.yaml one.wav >one.d.txt 2>&1
grep -qxF "1 word: 1 accepted, 0 rejected" one.d.txt
check "decode: 1 word" $? "$(cat one.d.txt)"
exit $fail
