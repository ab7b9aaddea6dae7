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
# An estimate at its search limit is said plainly (issue 12). The help's figure is the
# demodulator's default range; a capture impaired at +1500 ppm (beyond it) is reported at the
# limit in the human summary, on stderr and in --json, by decode and verify; one at +1000 ppm
# (inside it) is not.
lim=$("$ULK" decode --help | sed -n 's/.*off by up to +-\([0-9]*\) ppm.*/\1/p')
check "help names the clock search range" $([ -n "$lim" ]; echo $?) "help: $("$ULK" decode --help | head -8)"
"$ULK" impair demo.wav -o p1500.wav --ppm 1500 --ebn0 14 --seed 3 --dict demo-subbit.yaml 2>/dev/null || exit 1
"$ULK" impair demo.wav -o p1000.wav --ppm 1000 --ebn0 14 --seed 3 --dict demo-subbit.yaml 2>/dev/null || exit 1
"$ULK" decode --dict demo-subbit.yaml p1500.wav >p15.out 2>p15.err
grep -q "clock error estimate reached the search limit of +-$lim ppm (mean estimate +[0-9.]* ppm): the capture's clock may be further off; nothing beyond it is searched" p15.err
check "+1500 ppm: decode warns the clock estimate is at the limit" $? "stderr: $(cat p15.err)"
head -1 p15.out | grep -q "at the search limit of +-$lim ppm"
check "+1500 ppm: the summary says it" $? "$(head -1 p15.out)"
"$ULK" decode --dict demo-subbit.yaml p1500.wav --json >p15.json 2>/dev/null
LIM=$lim /usr/bin/python3 -c '
import json, os, sys
e = json.load(open("p15.json"))["estimates"]
sys.exit(0 if e["at_search_limit"] is True and e["search_limit_ppm"] == float(os.environ["LIM"]) else 1)'
check "+1500 ppm: --json at_search_limit true, search_limit_ppm = the help's figure" $? "$(tail -12 p15.json)"
"$ULK" verify --dict demo-subbit.yaml --upload demo.upl p1500.wav >v15.out 2>v15.err
grep -q "reached the search limit of +-$lim ppm" v15.err
check "+1500 ppm: verify warns too" $? "stderr: $(cat v15.err)"
"$ULK" verify --dict demo-subbit.yaml --upload demo.upl p1500.wav --json >v15.json 2>/dev/null
LIM=$lim /usr/bin/python3 -c '
import json, os, sys
e = json.load(open("v15.json"))["estimates"]
sys.exit(0 if e["at_search_limit"] is True and e["search_limit_ppm"] == float(os.environ["LIM"])
         and 1000 < e["rate_error_ppm"] <= float(os.environ["LIM"]) else 1)'
check "+1500 ppm: verify --json at_search_limit true, the estimate (a bound: beyond 1000, within the range), search_limit_ppm" $? "$(tail -8 v15.json)"
"$ULK" verify --dict demo-subbit.yaml --upload demo.upl p1000.wav --json >v10.json 2>/dev/null
/usr/bin/python3 -c '
import json, sys
d = json.load(open("v10.json"))
e = d["estimates"]
sys.exit(0 if d["match"] is True and e["at_search_limit"] is False and abs(e["rate_error_ppm"] - 1000) < 50
         and "carrier" not in d else 1)'
check "+1000 ppm: verify --json not at the limit, the estimate near 1000 ppm, no carrier member" $? "$(tail -8 v10.json)"
"$ULK" decode --dict demo-subbit.yaml p1000.wav --json >p10.json 2>p10.err
/usr/bin/python3 -c '
import json, sys
d = json.load(open("p10.json"))
sys.exit(0 if d["estimates"]["at_search_limit"] is False and sum(w["status"] == "accepted" for w in d["words"]) == 21 else 1)'
check "+1000 ppm: all 21 words, not at the limit" $? "$(tail -12 p10.json)"
check "+1000 ppm: no search-limit warning" $(grep -c "search limit" p10.err) "stderr: $(cat p10.err)"

# A complex capture of noise only: one warning that no carrier line was found anywhere.
/usr/bin/python3 - <<'PY'
import random, struct
r = random.Random(5)
with open("noise.cf32", "wb") as f:
    f.write(b"".join(struct.pack("<ff", r.gauss(0, 0.1), r.gauss(0, 0.1)) for _ in range(96000)))
PY
"$ULK" decode --dict demo-subbit.yaml noise.cf32 --rate 48000 --format cf32 --mode command >nz.out 2>nz.err
grep -q "no residual carrier line found anywhere in the capture" nz.err
check "complex noise: warned that no carrier line was found" $? "stderr: $(cat nz.err)"
"$ULK" verify --dict demo-subbit.yaml --upload demo.upl noise.cf32 --rate 48000 --format cf32 --mode command --json >nzv.json 2>/dev/null
/usr/bin/python3 -c '
import json, sys
d = json.load(open("nzv.json"))
k, e = d["carrier"], d["estimates"]
sys.exit(0 if k["acquired"] is False and k["at_search_limit"] is False and k["search_limit_hz"] > 0
         and e["signal_found"] is False and e["rate_error_ppm"] is None else 1)'
check "complex noise: verify --json carries the carrier search limit, nothing acquired" $? "$(tail -14 nzv.json)"
exit $fail
