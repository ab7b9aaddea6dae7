#!/bin/bash
# tests/golden/make_golden.sh ULK OUTDIR - writes every golden output of ulk into OUTDIR
# (created; must not exist or be empty): for the two demo dictionaries and for the
# generated ones (tests/golden/gen_dicts.py) the upload, inspect text/JSON/list, the timing
# table, modulated samples (float WAV, 16-bit WAV, raw f32 with SigMF), impaired captures with
# fixed seeds and their decode (human and --json) and verify (human and --json), plus for
# the demo the composite carrier (cf32), its impaired copy and decode/verify, the plan
# (text and JSON) and the spectrum summary. Exit codes of every command go to OUTDIR/rc.txt,
# stderr to *.err files: both are golden outputs too.
#
# Deterministic by construction: inputs are copied into OUTDIR and every command runs there
# with relative names (the outputs name their inputs), impair seeds are fixed, and nothing
# reads the clock. tests/test_golden.sh compares the digests with tests/golden/golden.sha256.
set -u
ULK=$(readlink -f "$1")
OUT=$2
HERE=$(cd "$(dirname "$0")" && pwd)
SRC=$(cd "$HERE/../.." && pwd)
mkdir -p "$OUT" || exit 2
cd "$OUT" || exit 2
if [ -n "$(ls -A .)" ]; then
    echo "make_golden.sh: $OUT is not empty" >&2
    exit 2
fi

: >rc.txt
# run NAME CMD...: stdout to NAME, stderr to NAME.err (removed when empty), exit code to rc.txt
run() {
    local name=$1
    shift
    "$@" >"$name" 2>"$name.err"
    local rc=$?
    echo "$name $rc" >>rc.txt
    [ -s "$name.err" ] || rm -f "$name.err"
    return 0
}

cp "$SRC/dictionaries/demo-subbit.yaml" "$SRC/dictionaries/demo-subbit.cmd" \
   "$SRC/dictionaries/demo-ccsds.yaml" "$SRC/dictionaries/demo-ccsds.cmd" \
   . || exit 2
mkdir carrier && cp "$SRC/dictionaries/carrier/demo-carrier.yaml" carrier/ || exit 2
printf '48000 120 0.04 12\n' >demo-subbit.params
printf '48000 -90 0.03 11\n' >demo-ccsds.params
/usr/bin/python3 "$HERE/gen_dicts.py" . 20 || exit 2

seed=0
for dict in demo-subbit.yaml demo-ccsds.yaml g??.yaml; do
    b=${dict%.yaml}
    read -r fs ppm delay ebn0 <"$b.params"
    seed=$((seed + 1))
    run "$b.validate.txt" "$ULK" validate "$dict"
    run "$b.compile.txt" "$ULK" compile --dict "$dict" "$b.cmd" -o "$b.upl"
    if [ ! -f "$b.upl" ]; then
        echo "make_golden.sh: $b.cmd did not compile" >&2
        exit 1
    fi
    run "$b.inspect.txt" "$ULK" inspect "$b.upl"
    run "$b.inspect.json" "$ULK" inspect "$b.upl" --json
    run "$b.inspect.list" "$ULK" inspect "$b.upl" --list
    run "$b.modulate.txt" "$ULK" modulate "$b.upl" -o "$b.wav" --rate "$fs" --timing "$b.timing.csv"
    run "$b.modulate-f32.txt" "$ULK" modulate "$b.upl" -o "$b.f32" --rate "$fs" -q
    run "$b.modulate-s16.txt" "$ULK" modulate "$b.upl" -o "$b.s16.wav" --rate "$fs" --format s16 -q
    # the clean capture decoded as it is
    run "$b.clean.decode.json" "$ULK" decode --dict "$dict" "$b.f32" --json
    # impaired: noise, clock error, lead-in, gain, DC; every other one inverted
    inv=()
    [ $((seed % 2)) -eq 0 ] && inv=(--invert)
    run "$b.impair.txt" "$ULK" impair "$b.wav" -o "$b.imp.wav" --ebn0 "$ebn0" --seed "$seed" --ppm "$ppm" \
        --delay "$delay" --amplitude 0.5 --dc 0.01 "${inv[@]}" --dict "$dict"
    run "$b.imp.decode.txt" "$ULK" decode --dict "$dict" "$b.imp.wav"
    run "$b.imp.decode.json" "$ULK" decode --dict "$dict" "$b.imp.wav" --json
    run "$b.imp.verify.txt" "$ULK" verify --dict "$dict" --upload "$b.upl" "$b.imp.wav"
    run "$b.imp.verify.json" "$ULK" verify --dict "$dict" --upload "$b.upl" "$b.imp.wav" --json
    # a noisier copy, where words are lost or rejected, as raw f32 with SigMF metadata
    run "$b.impair2.txt" "$ULK" impair "$b.f32" -o "$b.noisy.f32" --ebn0 $((ebn0 - 5)) --seed $((seed + 100)) \
        --ppm $((-ppm)) --dict "$dict"
    run "$b.noisy.decode.json" "$ULK" decode --dict "$dict" "$b.noisy.f32" --json
    run "$b.noisy.verify.txt" "$ULK" verify --dict "$dict" --upload "$b.upl" "$b.noisy.f32"
done

# the wrong dictionary: the sub-bit demo's capture decoded with a generated dictionary of the
# same link family, and the CCSDS demo's with a generated CCSDS one; pure noise
run wrongdict.decode.json "$ULK" decode --dict g00.yaml demo-subbit.imp.wav --json
run wrongdict-ccsds.decode.json "$ULK" decode --dict g03.yaml demo-ccsds.imp.wav --json
# 4 s of Gaussian noise (sigma 0.1) as a 16-bit WAV at 48 kHz, from Python's seeded generator
/usr/bin/python3 - <<'PYEOF' || exit 2
import random, struct, wave
r = random.Random(77)
w = wave.open("noise.wav", "wb")
w.setnchannels(1); w.setsampwidth(2); w.setframerate(48000)
w.writeframes(b"".join(struct.pack("<h", max(-32767, min(32767, int(round(3276.7 * r.gauss(0, 1))))))
                       for _ in range(4 * 48000)))
w.close()
PYEOF
run noise.decode.txt "$ULK" decode --dict demo-subbit.yaml noise.wav
run noise.decode.json "$ULK" decode --dict demo-subbit.yaml noise.wav --json

# composite carrier of the sub-bit demo (docs/carrier.md)
run plan.txt "$ULK" plan demo-subbit.yaml
run plan.json "$ULK" plan demo-subbit.yaml --json
run plan-solve.txt "$ULK" plan demo-subbit.yaml --mode full --solve
run plan-carrier.json "$ULK" plan carrier/demo-carrier.yaml --json --solve
run carrier.modulate.txt "$ULK" modulate demo-subbit.upl --carrier --mode full --dict demo-subbit.yaml \
    -o carrier.cf32 --rate 96000 -q
run carrier.impair.txt "$ULK" impair carrier.cf32 -o carrier.imp.cf32 --ebn0 12 --seed 9 --offset 350 \
    --delay 0.02 --dict demo-subbit.yaml
run carrier.decode.json "$ULK" decode --dict demo-subbit.yaml carrier.imp.cf32 --json --ranging
run carrier.decode.txt "$ULK" decode --dict demo-subbit.yaml carrier.imp.cf32
run carrier.verify.txt "$ULK" verify --dict demo-subbit.yaml --upload demo-subbit.upl carrier.imp.cf32
run carrier.cmd.modulate.txt "$ULK" modulate demo-subbit.upl --carrier --mode command --dict demo-subbit.yaml \
    -o carrier-cmd.wav --rate 48000 -q
run carrier-cmd.decode.json "$ULK" decode --dict demo-subbit.yaml carrier-cmd.wav --iq --mode command --json

# spectrum summaries
run spectrum.json "$ULK" spectrum demo-subbit.imp.wav --dict demo-subbit.yaml --json --nfft 4096
run spectrum-carrier.txt "$ULK" spectrum carrier.imp.cf32 --dict demo-subbit.yaml
exit 0
