#!/bin/bash
# tests/test_golden.sh [--update] - regenerates every golden output (tests/golden/make_golden.sh)
# and compares its SHA-256 with the manifest tests/golden/golden.sha256, printing each output
# that differs, is missing or is new. The outputs pin behaviour: upload bytes, inspect text and
# JSON, timing tables, samples, impaired captures, decode and verify outputs and exit codes,
# plan and spectrum figures. A change to any of them is either a bug or a deliberate change,
# made with the manifest in its own commit that names the outputs and why.
#   --update   rewrite the manifest from this build (then review `git diff` of it)
# Environment: ULK (the binary), ULK_SOURCE_DIR; GOLDEN_KEEP=DIR keeps the outputs in DIR.
set -u
SRC=${ULK_SOURCE_DIR:-$(cd "$(dirname "$0")/.." && pwd)}
ULK=${ULK:-$SRC/build/ulk}
MANIFEST=$SRC/tests/golden/golden.sha256
update=0
[ "${1:-}" = "--update" ] && update=1

work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
out=${GOLDEN_KEEP:-$work/out}
if ! bash "$SRC/tests/golden/make_golden.sh" "$ULK" "$out"; then
    echo "FAIL: make_golden.sh did not finish (see above)"
    exit 1
fi
(cd "$out" && find . -type f | sed 's|^\./||' | LC_ALL=C sort | xargs -d '\n' sha256sum) >"$work/now.sha256"

if [ $update = 1 ]; then
    cp "$work/now.sha256" "$MANIFEST"
    echo "wrote $MANIFEST ($(wc -l <"$MANIFEST") outputs)"
    exit 0
fi
if [ ! -f "$MANIFEST" ]; then
    echo "FAIL: no manifest $MANIFEST (tests/test_golden.sh --update writes it)"
    exit 1
fi
# join on the file name: differing digests, outputs that went missing, outputs that are new
awk 'NR == FNR { want[$2] = $1; next }
     { have[$2] = $1 }
     END {
         bad = 0
         for (f in want) {
             if (!(f in have)) { print "missing: " f; bad++ }
             else if (have[f] != want[f]) { print "differs: " f; bad++ }
         }
         for (f in have) if (!(f in want)) { print "new:     " f; bad++ }
         n = 0; for (f in want) n++
         if (bad) { printf("FAIL: %d of %d golden outputs changed\n", bad, n); exit 1 }
         printf("ok: all %d golden outputs identical\n", n)
     }' "$MANIFEST" "$work/now.sha256" | LC_ALL=C sort
exit "${PIPESTATUS[0]}"
