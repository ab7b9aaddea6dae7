#!/bin/bash
# tests/test_spec_examples.sh - every worked command list of the specification compiles, and
# gives what the specification shows.
#
# For each docs/spec/examples/NAME.cmd (its first line names its dictionary:
# "# dictionary: dictionaries/...") the test runs `ulk compile`:
#  - NAME.cmd must compile (exit 0) unless NAME starts with "refused-";
#  - NAME.expect, when present, lists what the specification shows for it, one fact a line:
#      N word HEX | N frame HEX | N cltu HEX        command N's word / TC frame / CLTU
#      N idles_before K | N wait_s S | N line L      command N's idle count, waits, source line
#      N sequence_count K | N frame_sequence K      (ccsds-tc)
#      N raw ARG 0xHEX                              an argument's raw field
#      idles_after K                                the postamble / final idle run
#      exit C                                       the expected exit status (refused lists)
#      message TEXT                                 a fragment of the messages on stderr
#    each compared with the upload file ulk writes (read with Debian's python3 json module).
# A refused list must leave no upload behind.
# The hex values shown were recomputed independently while writing the specification
# (docs/spec/subbit.md section 2.3, docs/spec/ccsds-tc.md section 2.5).
set -u
ULK=${ULK:?ULK must name the ulk binary}
SRC=${ULK_SOURCE_DIR:?ULK_SOURCE_DIR must name the source folder}
EX=$SRC/docs/spec/examples
T=$(mktemp -d)
trap 'rm -rf "$T"' EXIT
fails=0
fail() { echo "FAIL: $*"; fails=$((fails + 1)); }

shopt -s nullglob
lists=("$EX"/*.cmd)
[ ${#lists[@]} -ge 6 ] || { echo "FAIL: expected at least 6 examples in $EX, found ${#lists[@]}"; exit 1; }
n_checked=0 n_facts=0
for list in "${lists[@]}"; do
    name=$(basename "$list" .cmd)
    dict=$(sed -n '1s/^# dictionary: \([^[:space:]]*\).*/\1/p' "$list" | tr -d '\r')
    [ -n "$dict" ] || { fail "$name.cmd: first line must be '# dictionary: PATH'"; continue; }
    [ -f "$SRC/$dict" ] || { fail "$name.cmd: dictionary $dict not found"; continue; }
    case $name in
        *crlf*) grep -q $'\r$' "$list" || { fail "$name.cmd: meant to have CR LF line ends, has none (see .gitattributes)"; continue; } ;;
    esac
    expect=$EX/$name.expect
    want_rc=0
    case $name in refused-*) want_rc=1 ;; esac
    if [ -f "$expect" ]; then
        r=$(sed -n 's/^exit \([0-9]*\)$/\1/p' "$expect")
        [ -n "$r" ] && want_rc=$r
    fi
    # compile from a copy in the temporary folder, so that messages name the bare file name
    cp "$list" "$T/$name.cmd"
    (cd "$T" && "$ULK" compile -q --dict "$SRC/$dict" "$name.cmd" -o "$name.upl" 2> "$name.err")
    rc=$?
    if [ $rc -ne "$want_rc" ]; then
        fail "$name.cmd: ulk compile exit $rc, expected $want_rc; stderr:"; cat "$T/$name.err"; continue
    fi
    n_checked=$((n_checked + 1))
    if [ "$want_rc" -ne 0 ]; then
        [ -e "$T/$name.upl" ] && fail "$name.cmd: refused, yet an upload was left behind"
        for left in "$T"/*.tmp*; do fail "$name.cmd: a temporary file was left behind: $left"; done
    fi
    [ -f "$expect" ] || continue
    # messages: fragments of stderr
    while IFS= read -r frag; do
        n_facts=$((n_facts + 1))
        grep -q -F -- "$frag" "$T/$name.err" || { fail "$name.cmd: stderr lacks '$frag'; it was:"; cat "$T/$name.err"; }
    done < <(sed -n 's/^message //p' "$expect")
    [ "$want_rc" -eq 0 ] || continue
    # upload facts
    out=$(/usr/bin/python3 - "$T/$name.upl" "$expect" <<'PY'
import json, sys
upl, exp = sys.argv[1], sys.argv[2]
u = json.load(open(upl, encoding="utf-8"))
cmds = u["commands"]
bad = 0
n = 0
for ln in open(exp, encoding="utf-8"):
    f = ln.split()
    if not f or f[0].startswith("#") or f[0] in ("exit", "message"):
        continue
    n += 1
    if f[0] == "idles_after":
        got, want, what = str(u["idles_after"]), f[1], "idles_after"
    else:
        k = int(f[0])
        if k < 1 or k > len(cmds):
            print("FAIL: %s: command %d does not exist (the upload has %d)" % (exp, k, len(cmds)))
            bad += 1
            continue
        c = cmds[k - 1]
        if f[1] == "raw":
            args = {a["name"]: a["raw"] for a in c["args"]}
            got, want, what = args.get(f[2], "(no such argument)"), f[3], "command %d argument %s raw" % (k, f[2])
        else:
            got, want, what = str(c.get(f[1], "(no member %s)" % f[1])), f[2], "command %d %s" % (k, f[1])
    if got != want:
        print("FAIL: %s: %s is %s, the specification shows %s" % (upl.rsplit("/", 1)[-1], what, got, want))
        bad += 1
print("facts %d" % n)
sys.exit(1 if bad else 0)
PY
)
    prc=$?
    n_bad=$(echo "$out" | grep -c '^FAIL')
    if [ "$n_bad" -gt 0 ]; then
        echo "$out" | grep '^FAIL'
        fails=$((fails + n_bad))
    elif [ $prc -ne 0 ]; then
        fail "$name: the comparison did not run (python3 exit $prc): $out"
    fi
    k=$(echo "$out" | sed -n 's/^facts //p')
    if [ -z "$k" ] || [ "$k" -le 0 ]; then fail "$name.expect: no facts compared"; fi
    n_facts=$((n_facts + ${k:-0}))
done
if [ $fails -ne 0 ]; then
    echo "$fails failure(s)"
    exit 1
fi
echo "ok: $n_checked example lists compiled as the specification says, $n_facts facts compared"
